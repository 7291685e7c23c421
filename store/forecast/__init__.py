"""The maths of the due date: ΔP growth shapes, history matching, calibration, service-life
statistics, anomaly tests. No database. May import: store.base, store.physics."""
