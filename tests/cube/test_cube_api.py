"""The public surface of alveary.cube and alveary.ingest: exactly what __all__ lists."""

from __future__ import annotations

import alveary.cube
import alveary.ingest


def test_all_is_complete():
    # (its order is checked by ruff, RUF022)
    for module in (alveary.cube, alveary.ingest):
        names = module.__all__
        assert len(set(names)) == len(names)
        public = {n for n in vars(module) if not n.startswith("_")}
        submodules = {n for n in public if type(getattr(module, n)).__name__ == "module"}
        assert public - submodules == set(names)
        for n in names:
            assert getattr(module, n) is not None
