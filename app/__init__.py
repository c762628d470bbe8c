"""balance-desk applications built on balance_core's public API: the command line and the
dashboard."""
