"""Physics core of mwreach (no Qt)."""


def version() -> str:
    """The installed mwreach version ("unknown" when running from an uninstalled tree).

    Kept here, away from the heavy modules, so that ``mwreach --version`` and ``--help`` load
    little more than Python and numpy.
    """
    from importlib.metadata import PackageNotFoundError
    from importlib.metadata import version as dist_version

    try:
        return dist_version("mwreach")
    except PackageNotFoundError:  # running from a source tree without install
        return "unknown"
