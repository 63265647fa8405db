"""A generator that stops at a chosen stage, so a test can kill trackscan there.

It wraps the manifest's own generator (the promolecule of fold_model.py) and
writes one line per event to ``<folder>/events.txt`` (``start VALUE PID``,
``renamed VALUE PID``).  When the file ``<folder>/hold-STAGE`` exists, the
first call to reach STAGE takes it (an atomic rename, so only one call
holds), writes ``<folder>/at-STAGE`` and sleeps until it is killed:

* ``before``: the call has started; nothing is written yet;
* ``renamed``: the cube is in place under its final name, but trackscan has
  not recorded it yet (the window a kill used to lose).

Importable by worker processes (the test puts this folder on PYTHONPATH).
The test's driver runs ``trackscan refine`` through ``trackscan.cli.main``
with this generator in place of the manifest's.
"""

import os
import sys
import time
from pathlib import Path


class KillPointGenerator:
    """Delegates to `inner`; logs events; may hold at a stage."""

    def __init__(self, inner, folder):
        self.inner = inner
        self.folder = str(folder)
        self.has_geometry = inner.has_geometry
        self.scratch_folders = ()

    def geometry(self, value):
        return self.inner.geometry(value)

    def describe(self):
        return "kill-point test generator around " + self.inner.describe()

    def _event(self, what, value):
        with open(os.path.join(self.folder, "events.txt"), "a") as fh:
            fh.write(f"{what} {value!r} {os.getpid()}\n")

    def _maybe_hold(self, stage):
        hold = Path(self.folder) / f"hold-{stage}"
        try:
            os.rename(hold, Path(self.folder) / f"held-{stage}")
        except FileNotFoundError:
            return
        (Path(self.folder) / f"at-{stage}").write_text(str(os.getpid()))
        while True:
            time.sleep(0.05)

    def generate(self, value, cube_path, workdir=None):
        self._event("start", value)
        self._maybe_hold("before")
        out = self.inner.generate(value, cube_path, workdir=workdir)
        self._event("renamed", value)
        self._maybe_hold("renamed")
        return out


def main(argv):
    """``python killpoint_generator.py FOLDER refine ARGS...``: the CLI with this generator."""
    folder = argv[0]
    import trackscan.refine.scan as refine_scan
    from trackscan.cli import main as cli_main
    from trackscan.generators import make_generator

    original = refine_scan.refine_manifest

    def refine_manifest(manifest, **kw):
        inner = make_generator(manifest.generator, coordinate=manifest.coordinate)
        kw["generator"] = KillPointGenerator(inner, folder)
        return original(manifest, **kw)

    refine_scan.refine_manifest = refine_manifest
    return cli_main(argv[1:])


if __name__ == "__main__":
    import faulthandler
    import signal

    # the test sends SIGUSR1 to a run that does not stop in time: every thread's stack
    faulthandler.register(signal.SIGUSR1, all_threads=True)
    # a SIGINT ignored by the test runner is inherited and Python then leaves it
    # ignored; a user's interactive shell delivers it, so the run must see it
    signal.signal(signal.SIGINT, signal.default_int_handler)
    sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
    import killpoint_generator            # workers unpickle the class from this module name

    sys.exit(killpoint_generator.main(sys.argv[1:]))
