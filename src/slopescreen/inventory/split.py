"""Two halves of an inventory: one to choose parameters on, one to test the choice on.

Scores computed on the landslides a parameter was chosen on overstate the
map's skill (the choice fits them, noise included). The calibration sweep
therefore chooses on one half and scores on the other. Nearby landslides
share soil, slope and rain, so a random split of landslides leaves each
test landslide with neighbours in the choosing half; splitting by spatial
blocks keeps the halves apart (Brenning 2005, spatial cross-validation;
from memory).

* ``"blocks"`` (default): the grid is cut into square blocks (by default a
  quarter of its longer side, so about 16 blocks); blocks are shuffled with
  the seed and given in turn to the half that holds fewer landslides so far.
  A landslide belongs to the block of its middle cell; each half scores its
  own landslides against the other cells of its own blocks.
* ``"random"``: landslides are shuffled with the seed and split in two
  equal halves; each half scores its landslides against every cell that is
  not a landslide of either half.

See docs/methods.md, "Agreement with mapped landslides".
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputError

__all__ = ["Half", "split_inventory", "SPLITS"]

SPLITS = ("blocks", "random")
"""The ways an inventory can be split."""


@dataclass(frozen=True)
class Half:
    """One half of a split inventory.

    Attributes
    ----------
    positive_index, groups : numpy.ndarray of int64
        Its landslide cells (flat, sorted) and the landslide of each.
    landslide_cells : tuple of numpy.ndarray
        Cells of each of its landslides.
    domain : numpy.ndarray of bool
        Cells it scores: its own landslide cells and the negatives it is
        compared with (never a landslide cell of the other half).
    """

    positive_index: np.ndarray
    groups: np.ndarray
    landslide_cells: tuple
    domain: np.ndarray

    @property
    def n_landslides(self) -> int:
        return len(self.landslide_cells)


def split_inventory(inventory, grid, *, method: str = "blocks", seed: int = 0,
                    block_m: float | None = None) -> tuple[Half, Half]:
    """Split the inventory's landslides into a choosing half and a test half.

    Parameters
    ----------
    inventory : slopescreen.inventory.landslides.InventoryCells
    grid : Grid
    method : {"blocks", "random"}
    seed : int
    block_m : float, optional
        Side of the square blocks, m (``"blocks"`` only; default a quarter of
        the grid's longer side).

    Returns
    -------
    (Half, Half)
        Choosing half, test half.

    Raises
    ------
    InputError
        Fewer than two landslides in a half (the message says what to change).

    Examples
    --------
    >>> import shapely
    >>> from slopescreen.grid import Grid
    >>> from slopescreen.inventory.landslides import InventoryCells
    >>> grid = Grid.regular((8, 8), west=0, north=80, cell_m=10, crs="EPSG:32633")
    >>> cells = tuple(np.array([i * 9]) for i in range(8))          # the diagonal
    >>> inv = InventoryCells(cells, np.concatenate(cells), np.arange(8), (), "points", 8, 8, 0,
    ...                      8, "whole")
    >>> a, b = split_inventory(inv, grid, method="random", seed=1)
    >>> a.n_landslides, b.n_landslides, bool((a.domain & b.domain).sum() == 64 - 8)
    (4, 4, True)
    """
    if method not in SPLITS:
        raise ValueError(f"method: expected one of {SPLITS}, got {method!r}")
    cells = [c for c in inventory.landslide_cells if c.size]
    rng = np.random.default_rng(seed)
    valid = grid.valid.reshape(-1)
    every = np.concatenate(cells)
    if method == "random":
        order = rng.permutation(len(cells))
        half = len(cells) // 2
        sides = np.empty(len(cells), dtype=np.int8)
        sides[order[:half]] = 0
        sides[order[half:]] = 1
        shared = valid.copy()
        shared[every] = False
        domains = [shared.copy(), shared]
    else:
        rows, cols = grid.shape
        side_m = block_m if block_m is not None else max(rows * grid.dy_m, cols * grid.dx_m) / 4
        br = max(1, round(side_m / grid.dy_m))
        bc = max(1, round(side_m / grid.dx_m))
        nbr, nbc = math.ceil(rows / br), math.ceil(cols / bc)
        block_of_cell = lambda flat: (flat // cols) // br * nbc + (flat % cols) // bc  # noqa: E731
        mine = np.array([int(block_of_cell(c[c.size // 2])) for c in cells], dtype=np.int64)
        counts = np.bincount(mine, minlength=nbr * nbc)
        side_of_block = np.zeros(nbr * nbc, dtype=np.int8)
        held = [0, 0]
        for b in rng.permutation(nbr * nbc):
            s = 0 if held[0] <= held[1] else 1
            side_of_block[b] = s
            held[s] += int(counts[b])
        sides = side_of_block[mine]
        r = np.arange(rows) // br
        c = np.arange(cols) // bc
        block_grid = (r[:, None] * nbc + c[None, :]).reshape(-1)
        own_side = side_of_block[block_grid]
        others = [np.zeros(rows * cols, dtype=bool), np.zeros(rows * cols, dtype=bool)]
        for i, cs in enumerate(cells):
            others[1 - sides[i]][cs] = True        # a landslide of half s is foreign to the other
        domains = [valid & (own_side == s) & ~others[s] for s in (0, 1)]
    halves = []
    for s in (0, 1):
        own = [cs for cs, side in zip(cells, sides) if side == s]
        if len(own) < 2:
            hint = ("use larger or fewer blocks (--block-m) or --split random" if method == "blocks"
                    else "the inventory needs at least 4 landslides")
            raise InputError(f"the {('choosing', 'test')[s]} half of the split holds {len(own)} "
                             f"landslide(s); at least 2 are needed: {hint}")
        flat = np.concatenate(own)
        owner = np.repeat(np.arange(len(own), dtype=np.int64), [x.size for x in own])
        union, first = np.unique(flat, return_index=True)
        domain = domains[s]
        domain[union] = True
        halves.append(Half(positive_index=union.astype(np.int64), groups=owner[first],
                           landslide_cells=tuple(own), domain=domain.reshape(grid.shape)))
    return halves[0], halves[1]
