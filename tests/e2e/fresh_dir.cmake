# cmake -DDIR=<folder> -P fresh_dir.cmake: empties DIR (or creates it), so that a
# result left by an earlier run can never stand in for one this run failed to make.
if(NOT DIR)
  message(FATAL_ERROR "fresh_dir.cmake: pass -DDIR=<folder>")
endif()
file(REMOVE_RECURSE "${DIR}")
file(MAKE_DIRECTORY "${DIR}")
