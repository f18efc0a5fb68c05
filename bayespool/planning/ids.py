"""Fresh pool IDs for planned pools: ``<prefix><stage>_<number>``, colliding with no existing ID."""
from __future__ import annotations


def fresh_pool_ids(existing, count: int, prefix: str = "B") -> list[str]:
    """``count`` new IDs ``B1_01, B1_02, ...``; the stage number is the smallest one whose IDs are
    all unused (so a second batch becomes ``B2_...``)."""
    taken = {str(p) for p in existing}
    width = max(2, len(str(count)))
    stage = 1
    while True:
        stem = f"{prefix}{stage}_"
        if not any(t.startswith(stem) for t in taken):
            ids = [f"{stem}{j:0{width}d}" for j in range(1, count + 1)]
            if not taken.intersection(ids):
                return ids
        stage += 1
