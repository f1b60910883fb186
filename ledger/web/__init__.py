"""The web app (`refledger serve`): server-rendered pages for technicians, officers and
auditors, and a JSON API with the CLI's ``--json`` contract, on the same services the CLI uses.

FastAPI, Jinja2 and uvicorn are imported only here and in the `serve` command.
"""
