#include "chemistry/constants_file.hpp"

#include <filesystem>
#include <fstream>
#include <sstream>

namespace veq::chemistry {

Result<ConstantsLibrary> load_constants_library(const std::string& path) {
  std::error_code ec;
  if (!std::filesystem::exists(path, ec)) {
    return make_error(ErrorKind::not_found, "constants file '" + path +
                                                "' does not exist; give the path of a file in "
                                                "the format of chemistry/data/constants.json");
  }
  std::ifstream in(path, std::ios::binary);
  if (!in)
    return make_error(ErrorKind::io, "constants file '" + path + "' cannot be opened");
  std::ostringstream text;
  text << in.rdbuf();
  if (in.bad())
    return make_error(ErrorKind::io, "constants file '" + path + "' cannot be read");
  auto lib = ConstantsLibrary::parse(text.str());
  if (!lib) {
    return make_error(lib.error().kind, "'" + path + "': " + lib.error().message);
  }
  return lib;
}

}  // namespace veq::chemistry
