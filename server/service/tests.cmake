# Unit tests of access control and of the structured log (ogive_add_test from cmake/OgiveTest.cmake).
ogive_add_test(NAME token_secret_test SOURCES token_secret_test.cc LIBS ogive_service)
ogive_add_test(NAME bearer_header_test SOURCES bearer_header_test.cc LIBS ogive_service)
ogive_add_test(NAME rate_limiter_test SOURCES rate_limiter_test.cc LIBS ogive_service)
ogive_add_test(NAME authorizer_test SOURCES authorizer_test.cc LIBS ogive_service)
ogive_add_test(NAME token_admin_test SOURCES token_admin_test.cc LIBS ogive_service)
ogive_add_test(NAME log_test SOURCES log_test.cc LIBS ogive_service)
