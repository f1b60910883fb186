"""Report writers: plain data (dicts, DataFrames) in, files out (xlsx, pdf, csv, charts).

Writers never receive a database session; services build the data (``ledger.services.reporting``)
and pass it here. Heavy libraries (pandas, openpyxl, reportlab, matplotlib) are imported by the
writer modules themselves, so import a writer module only when a file is to be written.
"""
