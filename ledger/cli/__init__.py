"""The ``fluxledger`` command line: parse arguments, call the library, print (text or JSON)."""
