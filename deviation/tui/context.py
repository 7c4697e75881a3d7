"""What every screen of the terminal UI shares: the store, who is at the terminal, the clock."""

from __future__ import annotations

import getpass
import os
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path
from typing import Callable

from deviation.tui.sources import REPO_DEMO_CASES


def _os_user() -> str:
    try:
        return getpass.getuser()
    except Exception:  # noqa: BLE001 - some containers have no user name
        return "unknown"


@dataclass
class TuiContext:
    """The store, the actor and role (as declared, not authenticated), where case files are, now."""

    store: object
    actor: str = field(default_factory=_os_user)
    role: str = field(default_factory=lambda: os.environ.get("DEVIATION_ROLE") or "operator")
    cases_dir: Path | None = REPO_DEMO_CASES
    clock: Callable[[], datetime] = datetime.now
    demo: bool = False

    @property
    def draft_key(self) -> str:
        """The floor-entry draft of this actor (one per person at the terminal)."""
        return f"tui.floor.{self.actor}"

    def now_text(self) -> str:
        """The clock as the floor reads it, local time beside UTC (``08:50 local · 07:50 UTC``);
        the store records UTC."""
        return clock_text(self.clock())

    @property
    def store_name(self) -> str:
        name = str(getattr(self.store, "name", "store"))
        return Path(name).name if "://" not in name else name


def clock_text(now: datetime) -> str:
    """``08:50 local · 07:50 UTC`` (a naive time is the terminal's local time)."""
    local = now.astimezone() if now.tzinfo is not None else now
    utc = now.astimezone(timezone.utc)
    return f"{local:%H:%M} local · {utc:%H:%M} UTC"
