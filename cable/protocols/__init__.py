"""Protocols: the standard experiments on a strand, each a function returning an xarray.Dataset."""
