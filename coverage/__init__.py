"""Physics core of mwreach (no Qt)."""
