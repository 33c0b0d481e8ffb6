"""Headless recalculation of a workbook with no Excel.

Our worksheet functions are evaluated through the worksheet layer (:mod:`xlfuncs.sheet`);
standard Excel formulas through a formula-engine library behind the small adapter in
:mod:`xlfuncs.headless.engine`.  :func:`recalc` reads a workbook, evaluates every formula, and
writes a copy that keeps the formulas and stores their values (:mod:`xlfuncs.headless.xlsxpost`).
"""
