"""The terminal UI of faultfind (``faultfind ui``), built with Textual.

``app.py`` holds :class:`~faultfind.tui.app.FaultfindApp`; ``screens/`` one
screen per module, each with its ``.tcss`` beside it; ``widgets/`` the
workspace's panels.  ``entry.py`` (the quick reading entry's grammar) and
``bench.py`` (a session at the bench over the logbook) import no Textual and
are tested on their own.  docs/ui.md is the user's guide.

This package imports nothing on its own, so that ``faultfind.tui.entry``
can be used without loading Textual.
"""
