"""The `refledger` command line: thin Typer commands over the services."""
