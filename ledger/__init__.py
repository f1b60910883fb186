"""refledger: a refrigerant loss and regulatory record-keeping ledger."""

__version__ = "0.1.0"
