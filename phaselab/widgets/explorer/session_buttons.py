"""The Save and Load session buttons that both explorers share (mixed into each)."""

from __future__ import annotations

from phaselab.errors import PhaselabError


class SessionButtons:
    """Save and load the session named in the controls' session box, inside ``export_dir``;
    a refusal is said in the status line, never raised into the page."""

    def _save_clicked(self):
        try:
            path = self.save_session(self.export_dir / self.controls.session_path.value.strip())
        except PhaselabError as exc:
            self._say(f"Session not saved: {exc}", refused=True)
            return
        self._say(f"Saved the session to {path}.")

    def _load_clicked(self):
        try:
            self.load_session(self.export_dir / self.controls.session_path.value.strip())
        except PhaselabError as exc:
            self._say(f"Session not loaded: {exc}", refused=True)
