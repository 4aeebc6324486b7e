// Runs a fuzz target's entry point over every file of the given folders
// (its seed corpus and the crash inputs kept as regression tests), so that
// every build, not only the clang fuzzing build, replays them.
#include <cstdint>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <vector>

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size);

int main(int argc, char** argv) {
  std::size_t files = 0;
  for (int a = 1; a < argc; ++a) {
    std::error_code ec;
    if (!std::filesystem::is_directory(argv[a], ec)) {
      std::fprintf(stderr, "replay: %s is not a folder\n", argv[a]);
      return 2;
    }
    for (const auto& entry : std::filesystem::recursive_directory_iterator(argv[a])) {
      if (!entry.is_regular_file())
        continue;
      std::ifstream in(entry.path(), std::ios::binary);
      std::vector<char> bytes((std::istreambuf_iterator<char>(in)),
                              std::istreambuf_iterator<char>());
      LLVMFuzzerTestOneInput(reinterpret_cast<const std::uint8_t*>(bytes.data()), bytes.size());
      ++files;
    }
  }
  std::printf("replayed %zu inputs\n", files);
  return files > 0 ? 0 : 1;
}
