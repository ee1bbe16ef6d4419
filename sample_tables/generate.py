"""Rebuild every invented sample table, byte for byte, and the README that lists their findings.

Run ``python sample_tables/generate.py`` from the project root. Each table has a recipe module in
``sample_tables/recipes/``; its seed comes from its name, so adding a table changes no other.
"""

from __future__ import annotations

import importlib
import pkgutil
import sys
import zlib
from pathlib import Path
from types import ModuleType

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

HERE = Path(__file__).resolve().parent
if str(HERE) not in sys.path:
    sys.path.insert(0, str(HERE))

README_HEAD = """# Sample tables (invented)

Every table here is **invented** for demonstrations, in one scenario: refrigerated warehouses and their
daily refrigeration energy (one row per site-day, target `energy_kwh`). No number is a measurement.
`python sample_tables/generate.py` rebuilds all of them and this file from the recipes in `recipes/`
with fixed seeds; `tests/test_sample_tables.py` runs prefit on each and checks exactly the findings below,
and the "fix first" list each report opens with: the root findings (explained by no other) at `weakens` or above,
most damaging first, each with the number of findings it explains (gone once it is fixed).

"""


def recipes() -> list[ModuleType]:
    """Every recipe module, sorted by table name."""
    import recipes as package

    found = [
        importlib.import_module(f"recipes.{info.name}")
        for info in pkgutil.iter_modules(package.__path__)
        if not info.name.startswith("_")
    ]
    return sorted(found, key=lambda m: m.NAME)


def seed_of(name: str) -> int:
    """A stable seed per table name."""
    return zlib.crc32(name.encode("utf-8"))


def file_name(recipe: ModuleType) -> str:
    """The table's file name: its name and its format's extension."""
    return f"{recipe.NAME}.{recipe.FORMAT}"


def write_table(recipe: ModuleType, folder: Path) -> Path:
    """Build one table with its seed and write it to ``folder``, with any companion tables (CSV) its recipe builds from it."""
    frame = recipe.build(np.random.default_rng(seed_of(recipe.NAME)))
    path = folder / file_name(recipe)
    if recipe.FORMAT == "csv":
        path.write_text(frame.to_csv(index=False, lineterminator="\n"), encoding="utf-8")
    elif recipe.FORMAT == "parquet":
        table = pa.Table.from_pandas(frame, preserve_index=False).replace_schema_metadata(None)
        pq.write_table(table, path, compression="zstd")
    else:
        raise ValueError(f"recipe {recipe.NAME}: unknown format {recipe.FORMAT!r}")
    for companion, build_companion in getattr(recipe, "COMPANIONS", {}).items():
        extra = build_companion(np.random.default_rng(seed_of(companion)), frame)
        (folder / companion).write_text(extra.to_csv(index=False, lineterminator="\n"), encoding="utf-8")
    return path


def readme(all_recipes: list[ModuleType]) -> str:
    """The README listing each table, its command, its fix-first list and its expected findings."""
    parts = [README_HEAD]
    for recipe in all_recipes:
        doc = (recipe.__doc__ or "").strip()
        args = " ".join(a if " " not in a and a else repr(a) for a in recipe.ARGS)
        parts.append(f"## `{file_name(recipe)}`\n\n{doc}\n\n`prefit check sample_tables/{file_name(recipe)} {args}` exits {recipe.EXIT_CODE}.\n")
        if recipe.FIX_FIRST:
            parts.append("\nFix first:\n\n")
            for number, (rule, grade, columns, explains) in enumerate(recipe.FIX_FIRST, 1):
                named = f" ({', '.join(columns)})" if columns else ""
                also = f", explains {explains} finding{'' if explains == 1 else 's'}" if explains else ""
                parts.append(f"{number}. `{rule}`{named}: {grade}{also}\n")
        if recipe.EXPECTED:
            parts.append("\n| rule | grade | columns |\n|---|---|---|\n")
            for rule, grade, columns in recipe.EXPECTED:
                parts.append(f"| `{rule}` | {grade} | {', '.join(columns) or '-'} |\n")
        else:
            parts.append("\nNo findings.\n")
        parts.append("\n")
    return "".join(parts).rstrip("\n") + "\n"


def main(folder: Path = HERE) -> None:
    """Write every table and the README into ``folder``."""
    all_recipes = recipes()
    for recipe in all_recipes:
        write_table(recipe, folder)
    (folder / "README.md").write_text(readme(all_recipes), encoding="utf-8")


if __name__ == "__main__":
    main(Path(sys.argv[1]) if len(sys.argv) > 1 else HERE)
