# Unit tests of the study engine.
