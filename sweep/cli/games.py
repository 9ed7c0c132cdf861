"""``orderless games``: the built-in causal games with their causal bounds."""

from __future__ import annotations

import argparse
import json

from workers.games.causal_bound import causal_bound
from workers.games.causal_games import get_game, list_games


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("games", help="list the built-in causal games and their causal bounds")
    p.add_argument("--json", action="store_true", help="print a JSON list")
    p.set_defaults(func=run)


def describe_games() -> list[dict]:
    out = []
    for name in list_games():
        g = get_game(name)
        cb = causal_bound(g)
        out.append({"name": name, "parties": list(g.parties), "n_inputs": list(g.n_inputs),
                    "n_outputs": list(g.n_outputs), "causal_bound": float(cb.value),
                    "n_causal_strategies": int(cb.n_strategies), "description": g.description})
    return out


def run(args: argparse.Namespace) -> int:
    games = describe_games()
    if args.json:
        print(json.dumps(games, indent=2))
        return 0
    for g in games:
        print(f"{g['name']:<12} parties {','.join(g['parties']):<8} causal bound "
              f"{g['causal_bound']:.6f}  {g['description']}")
    return 0
