#include "controller/method/utc_time.hpp"

#include <cstdio>

namespace veq::method {

std::string format_utc(TimePoint t) {
  using namespace std::chrono;
  const auto day = floor<days>(t);
  const year_month_day ymd{day};
  const hh_mm_ss<milliseconds> hms{t - day};
  char out[48];
  std::snprintf(out, sizeof out, "%04d-%02u-%02uT%02d:%02d:%02d.%03dZ",
                static_cast<int>(ymd.year()), static_cast<unsigned>(ymd.month()),
                static_cast<unsigned>(ymd.day()), static_cast<int>(hms.hours().count()),
                static_cast<int>(hms.minutes().count()), static_cast<int>(hms.seconds().count()),
                static_cast<int>(hms.subseconds().count()));
  return out;
}

Result<TimePoint> parse_utc(const std::string& text) {
  using namespace std::chrono;
  int y = 0, mo = 0, d = 0, h = 0, mi = 0, s = 0, ms = 0, used = 0;
  bool ok = std::sscanf(text.c_str(), "%4d-%2d-%2dT%2d:%2d:%2d%n", &y, &mo, &d, &h, &mi, &s,
                        &used) == 6 &&
            used == 19;
  if (ok && text.size() == 24 && text[19] == '.') {
    int frac_used = 0;
    ok = std::sscanf(text.c_str() + 20, "%3d%n", &ms, &frac_used) == 1 && frac_used == 3 &&
         text[23] == 'Z';
  } else if (ok) {
    ok = text.size() == 20 && text[19] == 'Z';
  }
  const year_month_day ymd{year{y}, month{static_cast<unsigned>(mo)},
                           day{static_cast<unsigned>(d)}};
  if (!ok || !ymd.ok() || h > 23 || mi > 59 || s > 59 || h < 0 || mi < 0 || s < 0) {
    return make_error(ErrorKind::invalid_input,
                      "'" + text + "' is not a UTC time like 2026-12-02T01:48:22.123Z");
  }
  return TimePoint{sys_days{ymd} + hours{h} + minutes{mi} + seconds{s} + milliseconds{ms}};
}

}  // namespace veq::method
