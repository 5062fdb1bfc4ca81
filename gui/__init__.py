"""Qt front end and PDF sheets of mwreach."""
