#include "drivers/features.hpp"

#include <algorithm>

namespace veq::drivers {

std::vector<std::string> parse_features(const protocol::Message& identify,
                                        std::vector<std::string> fallback) {
  const auto text = identify.find("features");
  if (!text)
    return fallback;
  std::vector<std::string> out;
  std::size_t start = 0;
  while (start <= text->size()) {
    const auto comma = text->find(',', start);
    const auto word = text->substr(start, comma - start);
    if (!word.empty())
      out.emplace_back(word);
    if (comma == std::string_view::npos)
      break;
    start = comma + 1;
  }
  return out;
}

bool has_feature(const std::vector<std::string>& features, std::string_view word) {
  return std::find(features.begin(), features.end(), word) != features.end();
}

std::string join_features(const std::vector<std::string>& features) {
  std::string out;
  for (const auto& f : features) {
    if (!out.empty())
      out += ',';
    out += f;
  }
  return out;
}

}  // namespace veq::drivers
