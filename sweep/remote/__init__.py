"""Remote sweeps: ssh, the remote spec section, submit/fetch/cancel operations and the local
registry of remote runs."""
