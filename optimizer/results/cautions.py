"""Words shown wherever basiswise shows results. Hedging can lose money."""

CAUTIONS = (
    "Hedging decisions move real money and a hedge can lose money.",
    "Every figure is an estimate from price history: correlations and volatilities change, and "
    "basis risk remains.",
    "Exchange position limits, hedge-accounting treatment and reporting duties depend on the "
    "venue, the regulator and the auditor.",
    "Follow the firm's risk policy and the exchange rulebook, and take licensed advice; this tool "
    "does not replace them.",
)

SAMPLING_NOTES = {
    "overlapping": "horizon changes from overlapping windows: more rows than independent "
    "observations, so estimates are less certain than the row count suggests",
    "non-overlapping": "horizon changes from non-overlapping windows: independent but few",
    "scaled": "daily covariance scaled by the horizon: assumes daily changes are independent and "
    "identically distributed (no autocorrelation or mean reversion)",
}
