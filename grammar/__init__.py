"""The lark grammars of scanloom, shipped as package data and loaded through the package."""
