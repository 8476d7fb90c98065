"""Reference controllers: they speak the wire protocol and never import the plant."""
