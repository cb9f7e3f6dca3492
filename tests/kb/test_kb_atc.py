"""ATC codes of drug members: well-formed substance codes inside their class prefix.

Outside reference: the ATC structure of the WHO Collaborating Centre for Drug Statistics Methodology
(Guidelines for ATC classification and DDD assignment): level 1 anatomical group (one letter), level 2
(two digits), levels 3 and 4 (one letter each), level 5 chemical substance (two digits), e.g.
C03CA01 furosemide (structure and example from memory).  Anatomical main groups are A B C D G H J L
M N P R S V (from memory).
"""

from __future__ import annotations

from pathlib import Path

import pytest
import yaml

from tubulo.kb.schema import ATC_PREFIX_RE, ATC_SUBSTANCE_RE
from tubulo.paths import knowledge_dir

from .conftest import GOOD

MAIN_GROUPS = set("ABCDGHJLMNPRSV")  # from memory


def _classes(folder: Path):
    path = folder / "drugs.yaml"
    if not path.is_file():
        pytest.skip(f"no drugs.yaml in {folder}")
    return yaml.safe_load(path.read_text(encoding="utf-8")).get("drug_classes") or []


@pytest.mark.parametrize("folder", [GOOD, knowledge_dir()], ids=["fixture", "project"])
def test_atc_codes(folder):
    problems = []
    n = 0
    inns: dict[str, str] = {}
    for dc in _classes(folder):
        prefixes = dc.get("atc_prefix")
        prefixes = [prefixes] if isinstance(prefixes, str) else list(prefixes or [])
        if not prefixes:
            problems.append(f"{dc.get('id')}: no atc_prefix")
        for p in prefixes:
            if not ATC_PREFIX_RE.match(p) or p[0] not in MAIN_GROUPS:
                problems.append(f"{dc.get('id')}: prefix {p!r} is not a leading ATC level")
        for m in dc.get("members") or []:
            code = m.get("atc")
            if code is None:
                continue
            n += 1
            if not ATC_SUBSTANCE_RE.match(code) or code[0] not in MAIN_GROUPS:
                problems.append(f"{dc.get('id')}: {m.get('inn')} {code!r} is not an ATC substance code")
            elif not any(code.startswith(p) for p in prefixes):
                problems.append(f"{dc.get('id')}: {m.get('inn')} {code} is outside the class prefix {prefixes}")
            if code in inns and inns[code] != m.get("inn"):
                problems.append(f"{code} names two substances: {inns[code]} and {m.get('inn')}")
            inns[code] = m.get("inn")
    print(f"\n[{folder.name}] ATC: {n} member codes checked")
    assert n > 0
    assert not problems, "\n".join(problems)
