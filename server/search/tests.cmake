# Unit tests of the search core, one per source file (ogive_add_test from cmake/OgiveTest.cmake).
ogive_add_test(NAME cma_parameters_test SOURCES cma_parameters_test.cc LIBS ogive_search)
ogive_add_test(NAME ranking_test SOURCES ranking_test.cc LIBS ogive_search)
ogive_add_test(NAME space_test SOURCES space_test.cc LIBS ogive_search)
ogive_add_test(NAME random_stream_test SOURCES random_stream_test.cc LIBS ogive_search)
ogive_add_test(NAME gaussian_family_test SOURCES gaussian_family_test.cc LIBS ogive_search)
ogive_add_test(NAME bernoulli_family_test SOURCES bernoulli_family_test.cc LIBS ogive_search)
ogive_add_test(NAME categorical_family_test SOURCES categorical_family_test.cc LIBS ogive_search)
ogive_add_test(NAME search_distribution_test SOURCES search_distribution_test.cc LIBS ogive_search)
