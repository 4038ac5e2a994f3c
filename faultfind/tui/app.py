"""The faultfind terminal UI: the App, its themes and the order of its screens.

The screens follow the work at the panel:

1. :class:`~faultfind.tui.screens.caution.CautionScreen`, always first;
   nothing else is reachable until it is acknowledged, and quitting from it
   opens no file.
2. :class:`~faultfind.tui.screens.opening.OpeningScreen`: pick a circuit
   file or a bundled field case, start a logbook session or resume one.
3. :class:`~faultfind.tui.screens.bench.BenchScreen`: the workspace where
   readings are entered, committed to the logbook and diagnosed at once.
4. Close-out, history, export, help and power-state dialogs over it.

The heavy modules (pandas through the logbook, the engine) are imported in a
thread while the caution is read, so that the caution shows at once.
"""

from __future__ import annotations

import os
from pathlib import Path

from textual.app import App
from textual.binding import Binding
from textual.theme import Theme

from .screens.caution import CautionScreen

__all__ = ["FaultfindApp", "THEMES"]

#: faultfind's own two themes: "bench" for a dim plant room, "daylight" for
#: a laptop in the sun.  Every state is also written in words and a symbol.
THEMES = (
    Theme(name="faultfind-bench", dark=True, primary="#4f9fb0", secondary="#b89a4a",
          accent="#d58a3a", warning="#e3a532", error="#ec5f48", success="#62b872",
          foreground="#e6e8e6", background="#121619", surface="#1b2126", panel="#263039"),
    Theme(name="faultfind-daylight", dark=False, primary="#1d5d6b", secondary="#6b5518",
          accent="#9a4d0c", warning="#8a5a00", error="#a3231a", success="#1f6a33",
          foreground="#141414", background="#f5f3ee", surface="#ebe7de", panel="#d9d3c6"),
)


class FaultfindApp(App[int]):
    """The terminal UI.

    Parameters
    ----------
    circuit : str or os.PathLike, optional
        Circuit file to offer first (``faultfind ui CIRCUIT``); without it
        the opening screen offers the bundled field cases.
    logbook : str or os.PathLike, optional
        Logbook file (``--logbook``); default ``$FAULTFIND_LOGBOOK``, else
        the user's data folder.  It is opened only after the caution is
        acknowledged, and created only when a session is started.
    meters : str or os.PathLike, optional
        Meter profile file stored with new sessions.
    cases : str or os.PathLike, optional
        Folder of field cases (default: ``field_cases`` in the working
        folder, else the one beside the installed package).
    export_dir : str or os.PathLike, optional
        Folder the work-order report is offered in (default: the working
        folder).
    drill : dict, optional
        Run a drill instead of a session (``faultfind ui CIRCUIT --drill``):
        keys ``apprentice`` (required), ``seed`` and ``fault`` (as for
        :class:`faultfind.drill.Drill`).  The drill screen follows the caution.
    priors : Priors, optional
        Fault priors learned from outcomes (``--priors`` / ``--scope``,
        docs/priors.md) for the session's diagnoses, advice and drills;
        default the handbook's.
    """

    CSS_PATH = "app.tcss"
    TITLE = "faultfind"
    ENABLE_COMMAND_PALETTE = False
    BINDINGS = [
        Binding("ctrl+q", "quit", "quit", priority=True,
                tooltip="quit (every reading is in the logbook already)"),
        Binding("ctrl+c", "quit", "quit", show=False, priority=True),
        Binding("f2", "toggle_daylight", "daylight", show=False,
                tooltip="daylight colours, for a screen in the sun (again: back)"),
    ]

    def __init__(self, circuit=None, *, logbook=None, meters=None, cases=None, export_dir=None,
                 drill=None, priors=None):
        super().__init__()
        #: fault priors for diagnoses and drills (None: the handbook's; docs/priors.md)
        self.priors = priors
        if drill is not None and (not isinstance(drill, dict) or "apprentice" not in drill
                                  or set(drill) - {"apprentice", "seed", "fault"}):
            raise TypeError("drill: expected a dict with 'apprentice' and optionally 'seed', "
                            f"'fault', got {drill!r}")
        if drill is not None and circuit is None:
            raise TypeError("drill: a drill needs a circuit file")
        self.drill_options = drill
        for name, value in (("circuit", circuit), ("logbook", logbook), ("meters", meters),
                            ("cases", cases), ("export_dir", export_dir)):
            if value is not None and not isinstance(value, (str, os.PathLike)):
                raise TypeError(f"{name}: expected a file name, got {type(value).__name__}")
        self.circuit_path = None if circuit is None else os.fspath(circuit)
        self.logbook_arg = None if logbook is None else os.fspath(logbook)
        self.meters_path = None if meters is None else os.fspath(meters)
        self.cases_dir = None if cases is None else Path(cases)
        self.export_dir = Path(export_dir) if export_dir is not None else None
        self.acknowledged_at: str | None = None
        self.book = None
        self._quitting = False  # faultfind.logbook.Logbook once opened

    # -- start-up ------------------------------------------------------------------------

    def on_mount(self) -> None:
        for theme in THEMES:
            self.register_theme(theme)
        self.theme = THEMES[0].name
        self.push_screen(CautionScreen(), self._caution_acknowledged)
        self.run_worker(_warm_up, thread=True, group="warm-up", exit_on_error=False)

    def _caution_acknowledged(self, when: str | None) -> None:
        from .screens.opening import OpeningScreen

        self.acknowledged_at = when
        if self.drill_options is not None:
            from .screens.drill import DrillScreen

            self.push_screen(DrillScreen(self.circuit_path, **self.drill_options))
            return
        self.push_screen(OpeningScreen())

    def show_opening(self) -> None:
        """Replace the current screen by a new opening screen (another session).

        Screens reach the opening screen through the app, so that no screen
        module imports the opening screen (which imports the bench screen).
        """
        from .screens.opening import OpeningScreen

        self.switch_screen(OpeningScreen())

    # -- the logbook ---------------------------------------------------------------------

    @property
    def logbook_path(self) -> Path:
        """The logbook file this app uses (it may not exist yet)."""
        from faultfind.io.logbook import resolve_logbook_path

        return resolve_logbook_path(self.logbook_arg)

    def open_logbook(self, *, create: bool):
        """The open :class:`~faultfind.logbook.Logbook`, or None when there is
        none yet and ``create`` is False.  Raises LogbookError."""
        if self.book is not None:
            return self.book
        from faultfind.logbook import Logbook

        path = self.logbook_path
        if not create and not path.exists():
            return None
        self.book = Logbook(path, create=create)
        return self.book

    def on_unmount(self) -> None:
        if self.book is not None:
            self.book.close()

    # -- actions -------------------------------------------------------------------------

    def action_toggle_daylight(self) -> None:
        self.theme = THEMES[1].name if self.theme == THEMES[0].name else THEMES[0].name

    def action_quit(self) -> None:
        """Quit; a reading whose Enter was just pressed is committed first."""
        if not self._quitting:
            self._quitting = True
            self.run_worker(self._quit_after_commits(), group="quit", exclusive=True)

    async def _quit_after_commits(self) -> None:
        import asyncio

        for _ in range(10):  # let keys typed just before reach the entry and its commit
            await asyncio.sleep(0.02)
            busy = [w for w in self.workers if w.group == "commit" and not w.is_finished]
            if busy:
                for w in busy:
                    await w.wait()
                break
        self.exit(return_code=0)


def _warm_up() -> None:
    """Import the heavy modules while the caution is read (no file is opened)."""
    import faultfind.advise  # noqa: F401
    import faultfind.diagnose  # noqa: F401
    import faultfind.expect  # noqa: F401
    import faultfind.logbook  # noqa: F401
    import faultfind.report  # noqa: F401
