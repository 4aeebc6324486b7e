#include "controller/method/section_text.hpp"

namespace veq::method::text {

std::vector<Section> split_sections(std::string_view text,
                                    const std::vector<std::string_view>& known, Errors& errors,
                                    int* last_line) {
  std::vector<Section> sections;
  int line_no = 0;
  std::size_t pos = 0;
  while (pos < text.size()) {
    std::size_t end = text.find('\n', pos);
    if (end == std::string_view::npos)
      end = text.size();
    const std::string line = trim(text.substr(pos, end - pos));
    pos = end + 1;
    ++line_no;
    if (line.empty() || line.front() == '#')
      continue;
    if (line.front() == '[') {
      if (line.back() != ']') {
        errors.add(line_no, line, "a section header must end with ']'");
        break;
      }
      const std::string name = normal_key(line.substr(1, line.size() - 2));
      if (std::find(known.begin(), known.end(), name) == known.end()) {
        errors.add(line_no, name, "unknown section [" + name + "] (known: " + join(known) + ")");
        break;
      }
      sections.push_back(Section{name, line_no, {}});
      continue;
    }
    const auto eq = line.find('=');
    if (eq == std::string::npos) {
      errors.add(line_no, line, "expected 'key = value' or a [section] header");
      break;
    }
    const std::string key = normal_key(line.substr(0, eq));
    if (sections.empty()) {
      errors.add(line_no, key, "comes before any [section] header");
      break;
    }
    for (const auto& e : sections.back().entries) {
      if (e.key == key)
        errors.add(line_no, key,
                   "given twice in this section (first at line " + std::to_string(e.line) + ")");
    }
    sections.back().entries.push_back(Entry{key, trim(line.substr(eq + 1)), line_no, false});
  }
  if (last_line)
    *last_line = line_no;
  return sections;
}

}  // namespace veq::method::text
