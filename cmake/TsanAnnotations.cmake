# The `tsan` build: every executable of the tree gets tests/tsan/absl_sync_annotations.cc, which
# tells ThreadSanitizer what Debian's (uninstrumented) absl::Mutex does. The file is compiled once,
# as an object library, and its object linked into each program. Called once, after every
# subdirectory is added, so it sees every target.
function(ogive_link_tsan_annotations directory)
  if(NOT TARGET ogive_tsan_annotations)
    add_library(ogive_tsan_annotations OBJECT ${PROJECT_SOURCE_DIR}/tests/tsan/absl_sync_annotations.cc)
    target_link_libraries(ogive_tsan_annotations PUBLIC absl::synchronization)
  endif()
  get_property(targets DIRECTORY ${directory} PROPERTY BUILDSYSTEM_TARGETS)
  foreach(target IN LISTS targets)
    get_target_property(type ${target} TYPE)
    if(type STREQUAL "EXECUTABLE")
      target_sources(${target} PRIVATE $<TARGET_OBJECTS:ogive_tsan_annotations>)
      set_property(TARGET ${target} APPEND PROPERTY LINK_LIBRARIES absl::synchronization ${CMAKE_DL_LIBS})
    endif()
  endforeach()
  get_property(subdirectories DIRECTORY ${directory} PROPERTY SUBDIRECTORIES)
  foreach(subdirectory IN LISTS subdirectories)
    ogive_link_tsan_annotations(${subdirectory})
  endforeach()
endfunction()
