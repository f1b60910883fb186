"""Storage: tables, engine and connections, migrations, the hash chain, row <-> record mapping."""
