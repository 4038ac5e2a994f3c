"""The screens of the terminal UI, one per module (each with its ``.tcss``)."""
