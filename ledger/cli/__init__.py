"""The ``fluxledger`` command line: parse arguments, call the library, print (plain-text tables or JSON)."""
