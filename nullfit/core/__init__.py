"""What every stage shares: conventions (:mod:`.conventions`), self-describing results
(:mod:`.render`), the error types that say whose fault a failure is (:mod:`.errors`) and
provenance records (:mod:`.provenance`)."""
