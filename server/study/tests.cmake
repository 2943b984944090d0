# Unit tests of the study engine (ogive_add_test from cmake/OgiveTest.cmake).
ogive_add_test(NAME study_test SOURCES study_test.cc LIBS ogive_study ogive_test_support)
ogive_add_test(NAME study_property_test SOURCES study_property_test.cc
               LIBS ogive_study ogive_test_support)
ogive_add_test(NAME study_convergence_test SOURCES study_convergence_test.cc
               LIBS ogive_study ogive_test_support)
ogive_add_test(NAME study_restart_test SOURCES study_restart_test.cc
               LIBS ogive_study ogive_test_support)
