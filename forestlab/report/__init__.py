"""A self-contained HTML report on a fitted forest (:func:`.write.report`, called as ``forest.report(path)``).

The page is built from small pieces (:mod:`.page`, :mod:`.style`), pictures rendered to SVG by
:mod:`forestlab.plot` (:mod:`.pictures`), and sections: the fit and its out-of-bag results (:mod:`.summary`),
the predictors' importance and dependence (:mod:`.findings`), predictions for new cases (:mod:`.new_cases`).
"""
