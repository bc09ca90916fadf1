# Project-wide warning policy: the build must stay warning-free with these.
add_library(junco_warnings INTERFACE)
target_compile_options(junco_warnings INTERFACE -Wall -Wextra -Wpedantic -Wshadow -Wnon-virtual-dtor)
if(JUNCO_WERROR)
  target_compile_options(junco_warnings INTERFACE -Werror)
endif()
