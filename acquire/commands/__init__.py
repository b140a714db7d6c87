"""One module per ``acquire`` subcommand; see :mod:`acquire.cli` for the contract."""
