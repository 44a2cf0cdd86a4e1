"""Evaluates kinetic constants' textbook definitions at given params with
SymPy's units, for tests/derive.rs.

Input (a JSON file): {"params": [[name, "value unit"], ...],
"constants": [[name, definition], ...]}; units are products of M, mM, uM,
nM, pM, s, ms, min, h written as in a mechanism file ("2 /uM/s", "7 uM").
Output: {name: {"value": in mol/L and s, "concentration": power,
"time": power}}.
"""

import json
import sys

import sympy
from sympy.physics import units as u

MOLAR = u.mol / u.liter
UNIT = {
    "M": MOLAR,
    "mM": u.milli * MOLAR,
    "uM": u.micro * MOLAR,
    "nM": u.nano * MOLAR,
    "pM": u.pico * MOLAR,
    "s": u.second,
    "ms": u.milli * u.second,
    "min": u.minute,
    "h": u.hour,
}


def quantity(text):
    parts = text.split(None, 1)
    value = sympy.Rational(parts[0]) if "e" not in parts[0].lower() else sympy.nsimplify(float(parts[0]))
    if len(parts) == 1:
        return value
    unit = parts[1].strip()
    factor = sympy.Integer(1)
    sign = 1
    token = ""
    for ch in unit + "/":
        if ch in "/*":
            if token:
                name, _, power = token.partition("^")
                factor *= UNIT[name] ** (sign * int(power or 1))
            token = ""
            sign = -1 if ch == "/" else 1
        elif not ch.isspace():
            token += ch
    return value * factor


def main():
    spec = json.load(open(sys.argv[1]))
    values = {name: quantity(text) for name, text in spec["params"]}
    out = {}
    for name, definition in spec["constants"]:
        expr = sympy.sympify(definition, locals={k: sympy.Symbol(k) for k in values})
        q = sympy.simplify(expr.subs(values))
        base = u.convert_to(q, [u.mol, u.liter, u.second])
        mol, liter, second = sympy.symbols("mol liter second")
        plain = base.subs({u.mol: mol, u.liter: liter, u.second: second})
        exponents = {mol: 0, liter: 0, second: 0}
        for factor in sympy.Mul.make_args(plain):
            base, power = factor.as_base_exp()
            if base in exponents:
                exponents[base] += int(power)
        if exponents[mol] != -exponents[liter]:
            raise SystemExit(f"{name}: {plain} is not a power of mol/L times seconds")
        conc, time = exponents[mol], exponents[second]
        number = plain.subs({mol: 1, liter: 1, second: 1})
        out[name] = {"value": float(number), "concentration": int(conc), "time": int(time)}
    print(json.dumps(out))


if __name__ == "__main__":
    main()
