"""Validates an emitted SBML file with libSBML (the SBML reference library).

Usage: emit_check_sbml.py FILE.xml STATE.json

STATE.json: {"values": {id: value, ...}, "reaction": id}. Prints JSON:
{"errors": [...], "level": L, "version": V, "species": n, "reactions": n,
 "parameters": n, "events": n, "law": value of the reaction's kinetic law
 with the given values (and every other id at its initial value)}.
Exits 1 if the document has read errors or consistency errors (warnings
are reported, not counted).
"""
import json
import math
import sys

import libsbml


def main():
    doc = libsbml.readSBMLFromFile(sys.argv[1])
    with open(sys.argv[2]) as f:
        state = json.load(f)
    errors = []
    for i in range(doc.getNumErrors()):
        e = doc.getError(i)
        if e.getSeverity() >= libsbml.LIBSBML_SEV_ERROR:
            errors.append(e.getMessage())
    doc.checkConsistency()
    for i in range(doc.getNumErrors()):
        e = doc.getError(i)
        if e.getSeverity() >= libsbml.LIBSBML_SEV_ERROR:
            errors.append(e.getMessage())
    model = doc.getModel()
    out = {"errors": errors, "level": doc.getLevel(), "version": doc.getVersion()}
    if model is not None:
        out["species"] = model.getNumSpecies()
        out["reactions"] = model.getNumReactions()
        out["parameters"] = model.getNumParameters()
        out["events"] = model.getNumEvents()
        values = {}
        for k in range(model.getNumCompartments()):
            c = model.getCompartment(k)
            values[c.getId()] = c.getSize()
        for k in range(model.getNumSpecies()):
            s = model.getSpecies(k)
            values[s.getId()] = s.getInitialConcentration()
        for k in range(model.getNumParameters()):
            q = model.getParameter(k)
            values[q.getId()] = q.getValue()
        # Derived params: evaluate their initial assignments in order.
        names = {"ln": math.log, "log10": math.log10, "exp": math.exp, "sqrt": math.sqrt, "abs": abs,
                 "min": min, "max": max, "pow": math.pow, "pi": math.pi}

        def evaluate(math_ast):
            formula = libsbml.formulaToL3String(math_ast).replace("^", "**")
            return eval(formula, {"__builtins__": {}}, {**names, **values})

        for k in range(model.getNumInitialAssignments()):
            a = model.getInitialAssignment(k)
            values[a.getSymbol()] = evaluate(a.getMath())
        values.update(state["values"])
        for k in range(model.getNumRules()):
            rule = model.getRule(k)
            values[rule.getVariable()] = evaluate(rule.getMath())
        reaction = model.getReaction(state["reaction"])
        if reaction is not None:
            out["law"] = evaluate(reaction.getKineticLaw().getMath())
    print(json.dumps(out))
    sys.exit(1 if errors else 0)


if __name__ == "__main__":
    main()
