"""How sure is each prediction: sampling variance, prediction intervals, prediction sets, doubtful labels.

Everything here reads what a fitted forest already holds (the trees, their in-bag counts and the out-of-bag
results), so nothing is refit:

==============================  =====================================================================
module                          holds
==============================  =====================================================================
:mod:`.draws`                   how the trees drew their cases, and the trees' centred predictions with
                                the products of the in-bag counts that variance and jackknife+ read
:mod:`.variance`                ``Forest.variance``: infinitesimal jackknife and jackknife-after-bootstrap
                                (Wager, Hastie & Efron 2014; Wager & Athey 2018 for subsampling)
:mod:`.leaves`                  the leaf of every training case in every tree (kept in model files)
:mod:`.quantile`                ``Forest.quantiles``: quantile regression forest (Meinshausen 2006)
:mod:`.intervals`               ``Forest.intervals``: quantile or jackknife+-after-bootstrap intervals
                                (Kim, Xu & Barber 2020)
:mod:`.sets`                    ``Forest.prediction_sets``: out-of-bag conformal sets with the adaptive
                                score (Romano, Sesia & Candes 2020), marginal or by class
:mod:`.conformal`               the (n + 1) rank rule, conformal p-values (Bates, Candes, Lei, Romano &
                                Sesia 2023) and the rule of Benjamini & Hochberg (1995)
:mod:`.doubt`                   ``OutOfBag.doubtful(fdr=..., trusted=...)``: doubtful labels at a false
                                discovery rate, tested against trusted cases
:mod:`.outputs`                 what the results share: read-only arrays, the text tables they print as
==============================  =====================================================================

This package's ``__init__`` imports nothing, so :mod:`forestlab.analyses.results` can use :mod:`.doubt` and
:mod:`.outputs` (which import no result class) without an import cycle.
"""
