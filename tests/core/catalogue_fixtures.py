"""A small analysed ledger of seeded stars, shared by the catalogue tests.

Stars come from ``core.synthetic.make_survey`` (seed 7) and are analysed by
``core.analysis``; nothing here is a hand-made result.  The roles name what
the seeded survey holds (checked in ``pick_stars``), so a change of the
synthetic sky that moves a role fails loudly rather than silently testing
something else.
"""

from __future__ import annotations

import json

from phasewise.core.analysis import AnalysisSettings, analyse
from phasewise.core.ledger import Ledger
from phasewise.core.synthetic import make_survey

SEED = 7
N_STARS = 40


def pick_stars(survey):
    """Role -> star id, chosen by injected truth and the analysis's top suggestion."""
    truth = {s.truth.star_id: s.truth for s in survey.stars}
    wanted = {
        "rrab": ("RRab", "RRab"),
        "rrc": ("RRc", "RRc"),
        "ew": ("EW", "EW"),  # suggested EW at twice the Fourier period
        "ea": ("EA", "EA"),
        "ew_as_rrc": ("EW", "RRc"),  # an EW the machine took for an RRc at half its period
        "const": ("NONVAR", "CONST"),
        "rrd": ("RRd", "RRd"),
    }
    return wanted, truth


def build(path):
    """Analyse the chosen seeded stars into a new ledger at ``path``; returns (roles, truth)."""
    survey = make_survey(N_STARS, seed=SEED)
    wanted, truth = pick_stars(survey)
    settings = AnalysisSettings()
    roles: dict[str, str] = {}
    results = []
    curves = []
    for lc in survey.lightcurves:
        if len(roles) == len(wanted):
            break
        true_class = truth[lc.star_id].class_code
        open_roles = [r for r, (t, _) in wanted.items() if t == true_class and r not in roles]
        if not open_roles:
            continue
        result = json.loads(json.dumps(analyse(lc, settings).to_dict()))
        top = result["suggestions"][0]["class"] if result["suggestions"] else None
        for role in open_roles:
            if wanted[role][1] == top:
                roles[role] = lc.star_id
                results.append((lc.star_id, settings.hash, result))
                curves.append(lc)
                break
    missing = set(wanted) - set(roles)
    assert not missing, f"the seeded survey no longer holds {missing}"
    ledger = Ledger.create(path)
    ledger.add_stars(curves)
    ledger.set_analysis_settings(settings.to_dict(), settings.hash)
    ledger.store_results(results)
    return ledger, roles, truth
