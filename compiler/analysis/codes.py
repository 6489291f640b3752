"""Interconnect test codes: the published sequences that give every net its own code.

A net's code is the sequence of values it is driven to over the test's vectors; it is held as
a Python integer whose bit v is the value at vector v (bit-parallel over all vectors).

- Counting sequence (W. H. Kautz, "Testing for faults in wiring networks", 1974): net i gets
  the binary number i, ceil(log2 N) vectors.
- Modified counting sequence (P. Goel and M. T. McMahon, "Electronic chip-in-place test",
  1982): codes 1..N, never all-0 or all-1, so a stuck-at net never looks like a good one:
  ceil(log2(N + 2)) vectors. This is what `counting` generates.
- True/complement (K. D. Wagner, "Interconnect testing with boundary scan", 1987): the
  modified counting codes followed by their complements, 2 * ceil(log2(N + 2)) vectors; no
  wired-AND or wired-OR short of two nets can produce a third net's code.
- Walking one: vector v drives net v alone to 1, N vectors.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["CODE_KINDS", "CodeSet", "vector_count", "make_codes"]

CODE_KINDS = ("counting", "true-complement", "walking-one")


def _width(nets: int) -> int:
    """ceil(log2(nets + 2)), computed exactly on integers."""
    return max(1, (nets + 1).bit_length())


def vector_count(kind: str, nets: int) -> int:
    """The number of vectors `kind` needs for `nets` nets (the papers' formulas)."""
    if nets <= 0:
        return 0
    if kind == "counting":
        return _width(nets)
    if kind == "true-complement":
        return 2 * _width(nets)
    if kind == "walking-one":
        return nets
    raise ValueError(f"unknown code kind {kind!r}")


@dataclass(frozen=True, slots=True)
class CodeSet:
    """Codes for `nets` nets over `vectors` vectors; codes[i] bit v = net i's value at vector v."""

    kind: str
    vectors: int
    codes: tuple[int, ...]

    def value(self, net: int, vector: int) -> int:
        return (self.codes[net] >> vector) & 1

    def vector(self, vector: int) -> tuple[int, ...]:
        """Every net's value at one vector."""
        return tuple((code >> vector) & 1 for code in self.codes)


def make_codes(kind: str, nets: int) -> CodeSet:
    vectors = vector_count(kind, nets)
    if kind == "counting":
        codes = tuple(range(1, nets + 1))
    elif kind == "true-complement":
        width = _width(nets)
        full = (1 << width) - 1
        codes = tuple(i | ((full ^ i) << width) for i in range(1, nets + 1))
    elif kind == "walking-one":
        codes = tuple(1 << i for i in range(nets))
    else:
        raise ValueError(f"unknown code kind {kind!r}")
    return CodeSet(kind, vectors, codes)
