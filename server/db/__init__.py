"""The store: table models (:mod:`.models`), engines and sessions (:mod:`.session`), migrations (:mod:`.migrate`)."""
