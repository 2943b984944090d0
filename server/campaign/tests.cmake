# Unit tests of the campaign engine (ogive_add_test from cmake/OgiveTest.cmake).
ogive_add_test(NAME campaign_test SOURCES campaign_test.cc LIBS ogive_campaign ogive_test_support)
ogive_add_test(NAME campaign_property_test SOURCES campaign_property_test.cc
               LIBS ogive_campaign ogive_test_support)
ogive_add_test(NAME campaign_convergence_test SOURCES campaign_convergence_test.cc
               LIBS ogive_campaign ogive_test_support)
ogive_add_test(NAME campaign_restart_test SOURCES campaign_restart_test.cc
               LIBS ogive_campaign ogive_test_support)
ogive_add_test(NAME termination_reach_test SOURCES termination_reach_test.cc
               LIBS ogive_campaign ogive_test_support)
ogive_add_test(NAME campaign_noise_test SOURCES campaign_noise_test.cc
               LIBS ogive_campaign ogive_test_support)
ogive_add_test(NAME campaign_surrogate_test SOURCES campaign_surrogate_test.cc
               LIBS ogive_campaign ogive_test_support)
