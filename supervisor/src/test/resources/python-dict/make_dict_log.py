#!/usr/bin/python3
"""Writes the recorded log of PythonDictLineParserTest: lines as Python's own print(dict) writes
them, and next to it, as the reference, what Python's own parser (ast, evaluated with
nothing but the names nan and inf) reads back from each line: its numbers (bool and None left out), nested dicts flattened to
dotted keys, as JSON (non-finite values as the strings "nan", "inf", "-inf").

The run is invented (a scenario of our own): 240 logging steps of a training loss with a
progress-bar prefix on some lines, an evaluation dict every 10 steps with a nested dict, a
string, True/False/None, and a nan and an inf once each.

    /usr/bin/python3 make_dict_log.py LOG_FILE
"""
import ast
import json
import math
import sys


def flatten(d, prefix, out):
    for k, v in d.items():
        if isinstance(v, dict):
            flatten(v, prefix + k + ".", out)
        elif isinstance(v, bool) or v is None:
            continue
        elif isinstance(v, (int, float)):
            out[prefix + k] = v if math.isfinite(v) else repr(v)
    return out


def main(path):
    lines = []
    for step in range(1, 241):
        loss = 2.1 * math.exp(-step / 70.0) + 0.05 * math.cos(step / 3.0)
        if step == 77:
            loss = float("nan")
        d = {"loss": round(loss, 4) if math.isfinite(loss) else loss,
             "grad_norm": 1.0 + (step % 7) / 10.0, "learning_rate": 5e-05 * (1 - step / 300.0),
             "epoch": round(step / 80.0, 2), "step": step}
        prefix = "%3d%%|%s| %d/240 " % (step * 100 // 240, "#" * (step // 24), step) \
            if step % 4 == 0 else ""
        lines.append(prefix + str(d))
        if step % 10 == 0:
            e = {"eval_loss": 2.2 * math.exp(-step / 90.0) + 0.1, "step": step,
                 "eval": {"accuracy": min(0.99, step / 250.0), "f1": 0.5},
                 "best": step == 200, "note": "it's fine, {ok}", "tag": None,
                 "eval_runtime": float("inf") if step == 120 else 3.25}
            lines.append(str(e))
    with open(path, "w") as out:
        out.write("\n".join(lines) + "\n")
    with open(path + ".expected.jsonl", "w") as out:
        for line in lines:
            text = line[line.index("{"):]
            # Python's own parser; nan and inf are names to it, given their float values
            d = eval(compile(ast.parse(text, mode="eval"), "line", "eval"),
                     {"__builtins__": {}}, {"nan": float("nan"), "inf": float("inf")})
            out.write(json.dumps(flatten(d, "", {}), sort_keys=True) + "\n")


if __name__ == "__main__":
    main(sys.argv[1])
