"""An inbox folder of model runs: every complete new file is ingested once.

:class:`Inbox` polls a folder (polling works on every file system, network mounts
included, where change notifications do not).  A file is *complete* when it has not changed
for ``settle_s`` seconds (writers that rename a finished file into the folder are taken at
once after that delay); names starting with ``.`` or ending in ``.part``/``.tmp`` are
ignored.  Each file goes through :func:`ptype.ingest.pipeline.ingest_file`, whose claim in the
store (by content) makes it safe to run several watchers on one folder and one database, and
to restart a watcher at any time:

* ingested, or ingested before (the same content): moved to ``done/``;
* unreadable: moved to ``rejected/`` with ``NAME.reason.txt`` beside it;
* claimed by another live watcher: left alone (that watcher moves it).
"""

from __future__ import annotations

import logging
import os
import time
from collections.abc import Callable
from datetime import datetime
from pathlib import Path

from ptype.errors import ReaderError

log = logging.getLogger("ptype.watch")

IGNORED_SUFFIXES = (".part", ".tmp", ".reason.txt")
#: Sub-folders of the inbox.
DONE, REJECTED = "done", "rejected"


class Inbox:
    """Poll ``directory`` and ingest its complete files (see the module notes)."""

    def __init__(self, store, directory: str | os.PathLike, *, clock: Callable[[], datetime],
                 source: str | None = None, settle_s: float = 5.0, evaluate: bool = True,
                 cap_status: str | None = None):
        self.store, self.dir, self.clock = store, Path(directory), clock
        self.source, self.settle_s, self.evaluate = source, settle_s, evaluate
        self.cap_status = cap_status
        if not self.dir.is_dir():
            from ptype.errors import OptionError
            raise OptionError(f"inbox {self.dir}: not a directory", field="directory")
        (self.dir / DONE).mkdir(exist_ok=True)
        (self.dir / REJECTED).mkdir(exist_ok=True)

    def complete_files(self) -> list[Path]:
        """Files of the inbox unchanged for ``settle_s`` seconds, oldest first."""
        now = time.time()
        out = []
        for entry in os.scandir(self.dir):
            name = entry.name
            if not entry.is_file() or name.startswith(".") or name.endswith(IGNORED_SUFFIXES):
                continue
            try:
                mtime = entry.stat().st_mtime
            except FileNotFoundError:  # taken by another watcher meanwhile
                continue
            if now - mtime >= self.settle_s:
                out.append((mtime, Path(entry.path)))
        return [p for _, p in sorted(out)]

    def _move(self, path: Path, folder: str) -> Path | None:
        target = self.dir / folder / path.name
        try:
            os.replace(path, target)
        except FileNotFoundError:
            return None  # another watcher moved it
        return target

    def process(self, path: Path) -> dict:
        """Ingest one file and file it away; the result (``status`` says what happened)."""
        from ptype.ingest.pipeline import DEFAULT_SOURCE, ingest_file
        try:
            result = ingest_file(self.store, path, now=self.clock(),
                                 source=self.source or DEFAULT_SOURCE, evaluate=self.evaluate,
                                 cap_status=self.cap_status)
        except FileNotFoundError:
            return {"file": path.name, "status": "gone"}
        except ReaderError as exc:
            self._reject(path, str(exc))
            return {"file": path.name, "status": "rejected", "reason": str(exc)}
        if result["status"] in ("ingested", "already ingested"):
            self._move(path, DONE)
        elif result["status"] == "already rejected":
            self._reject(path, "the same content was rejected before")
        log.info("%s: %s", path.name, result["status"] if result["status"] != "ingested" else
                 f"{result['profiles']} profiles for {result['sites']} sites")
        return result

    def _reject(self, path: Path, reason: str) -> None:
        target = self._move(path, REJECTED)
        if target is None:
            return
        note = target.with_name(target.name + ".reason.txt")
        note.write_text(f"{self.clock().isoformat()} rejected {path.name}: {reason}\n",
                        encoding="utf-8")
        log.warning("%s: rejected: %s", path.name, reason)

    def poll_once(self) -> list[dict]:
        """One pass over the inbox."""
        return [self.process(p) for p in self.complete_files()]

    def run(self, interval_s: float = 10.0, should_stop: Callable[[], bool] = lambda: False,
            ) -> None:
        """Poll until ``should_stop()``."""
        log.info("watching %s every %.0f s", self.dir, interval_s)
        while not should_stop():
            self.poll_once()
            deadline = time.monotonic() + interval_s
            while time.monotonic() < deadline and not should_stop():
                time.sleep(min(0.2, interval_s))

