"""The board kit: C99 sources for the board's side of the link, generated from the
signal map (``generate.py``) with the codec, an example controller and a Makefile from
``templates/``. May import the plant's parameter types and the protocol room."""
