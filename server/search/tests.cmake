# Unit tests of the search core, one per source file (ogive_add_test from cmake/OgiveTest.cmake).
