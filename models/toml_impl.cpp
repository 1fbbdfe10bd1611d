// toml++'s implementation, compiled once here (TOML_HEADER_ONLY=0 for every translation unit, CMakeLists.txt) instead
// of linked from its shared library: the `thermorph` executable then needs no shared libstdc++ (DEVELOPERS.md,
// "Memory at 10^5 nodes, twelfth round").
#define TOML_IMPLEMENTATION
#include <toml++/toml.h>
