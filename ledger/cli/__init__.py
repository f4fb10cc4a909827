"""The ``fluxledger`` command line: parse arguments, call the library, print (rich or JSON)."""
