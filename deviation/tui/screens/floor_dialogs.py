"""Dialogs of the floor entry screen: import a retort log, follow a log the recorder is writing."""

from __future__ import annotations

from deviation.tui.follow import FollowStart, open_followed_log
from deviation.tui.widgets.form import Field, FileChoice, FormDialog, PathResult


class ImportLogDialog(PathResult, FormDialog[FileChoice]):
    TITLE_TEXT = "Import a retort log (CSV: time_min, temperature_C)"
    FIELDS = (Field("path", "File", "path/to/retort-log.csv"),)
    MISSING = "give the path of the retort log CSV"


class FollowLogDialog(FormDialog[FollowStart]):
    """The path of a retort log still being written; checked in place (exists, valid header)."""

    TITLE_TEXT = "◉ Follow a retort log the recorder is still writing (CSV)"
    FIELDS = (Field("path", "File (rows are read as they are written)", "path/to/retort-log.csv"),)

    def make_result(self, v):
        return open_followed_log(v["path"])
