"""Pure domain: frozen records, event kinds, the state fold, leak rates and emissions.

Nothing here does I/O or reads the clock; time-dependent functions take ``as_of``.
"""
