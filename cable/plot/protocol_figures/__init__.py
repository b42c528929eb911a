"""The figures of the protocol results, one module per protocol (``cable/protocols/<name>.py``
names its module's ``figure(ds, fig)`` as its :attr:`~cable.protocols.base.Protocol.figure`)."""
