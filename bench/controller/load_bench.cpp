// Load: many instruments running series at once in one process, each on its
// own thread with its own simulated rack (own virtual clock, own seed),
// writing to ONE shared SQLite file, as a lab's instruments share the lab's
// file: through one connection shared by all (the store serialises its
// calls: one writer), or with "each" as the fourth argument one connection
// per instrument (SQLite's file lock and busy timeout between them). Each works through the demo's
// Tuesday rack (controller/cli/ demo_data.hpp, without the injected fault) again and again until
// its virtual clock has passed the simulated hours asked for.
//
// Measures wall time, series, titration runs and points stored, the peak
// resident memory (getrusage ru_maxrss) and, after each round, the resident
// memory, the heap in use (glibc mallinfo2: bytes handed out and not freed,
// in every arena, counting the blocks freed into each thread's cache), the
// live C++ objects (counted by this program's operator new and delete) and
// SQLite's own memory (sqlite3_memory_used: page caches and statements), and
// the same once the threads have ended (memory must stay flat: what grows
// must be a cache with a bound), and SQLite's busy/locked errors (must be 0:
// the store sets a busy timeout). Then checks that no point is lost (per run:
// points table == the run's point_count == what the observer saw; overall:
// points table == every point observed) and that every instrument's first
// series gives the same results as the same series with the same seed run
// alone (one thread, a fresh file): bit-identical, since virtual time makes
// a run deterministic. Prints a Markdown summary (docs/reliability.md keeps
// the latest). Exit status 1 if a check fails.
//
//   build/bin/veq_load_bench [instruments, default 16] [simulated hours, default 24]
//                            [database file, default veq-load.sqlite (replaced)]
//                            [shared | each, default shared]
#include <malloc.h>
#include <sqlite3.h>
#include <sys/resource.h>
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cinttypes>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <memory>
#include <mutex>
#include <new>
#include <string>
#include <thread>
#include <vector>

#include "controller/cli/demo_data.hpp"
#include "controller/cli/simulated_rack.hpp"
#include "controller/method/method_file.hpp"
#include "controller/method/stored_methods.hpp"
#include "controller/method/titer.hpp"
#include "controller/method/utc_time.hpp"
#include "controller/series/series_file.hpp"
#include "controller/series/series_runner.hpp"
#include "controller/store/sqlite_store.hpp"
#include "simulator/scenario.hpp"

using namespace veq;

namespace {

// SQLite reports every statement that ends in SQLITE_BUSY or SQLITE_LOCKED
// (after the busy timeout gave up) through its error log.
std::atomic<long> g_busy_errors{0};
std::mutex g_log_lock;
std::vector<std::string> g_busy_messages;  ///< the first few, with SQLite's extended code
void sqlite_log(void*, int code, const char* message) {
  const int primary = code & 0xff;
  if (primary != SQLITE_BUSY && primary != SQLITE_LOCKED)
    return;
  ++g_busy_errors;
  std::lock_guard<std::mutex> hold(g_log_lock);
  if (g_busy_messages.size() < 5)
    g_busy_messages.push_back("SQLite code " + std::to_string(code) + ": " + message);
}

/// Resident memory now, KiB (from /proc/self/statm).
long rss_kib() {
  std::ifstream statm("/proc/self/statm");
  long size = 0, resident = 0;
  statm >> size >> resident;
  return resident * (sysconf(_SC_PAGESIZE) / 1024);
}

/// Heap in use now, KiB: what malloc has handed out and not had back, in
/// every arena, small blocks and mmapped ones (glibc 2.36's mallinfo2 adds
/// up every arena, whatever its manual page's BUGS section says: four
/// threads keeping 1,000 blocks of 1,000 bytes each raise it by 4.05 MB, the
/// sum malloc_stats shows over the five arenas). It also counts the blocks
/// a thread has freed into its own cache (glibc's tcache: up to 7 blocks of
/// each size to 1,032 bytes, 235 KiB a thread at most), which glibc
/// marks in use until the thread reuses them or ends.
long heap_in_use_kib() {
  const struct mallinfo2 info = mallinfo2();
  return static_cast<long>((info.uordblks + info.hblkhd) / 1024);
}

// Live C++ objects: every block `operator new` hands out and `operator
// delete` has not had back, counted in the usable size malloc gives it
// (replaced below for this program). Unlike the heap in use it leaves out
// freed blocks in the threads' caches and SQLite's own memory, so it grows
// only when objects do.
std::atomic<long long> g_live_bytes{0};
std::atomic<long long> g_live_blocks{0};

/// Live C++ objects now, KiB.
long live_objects_kib() {
  return static_cast<long>(g_live_bytes.load(std::memory_order_relaxed) / 1024);
}
/// Live C++ objects now, blocks.
long long live_blocks() {
  return g_live_blocks.load(std::memory_order_relaxed);
}

/// SQLite's own heap now, KiB (every connection of the process).
long sqlite_kib() {
  return static_cast<long>(sqlite3_memory_used() / 1024);
}

/// Peak resident memory of the process so far, KiB.
long peak_rss_kib() {
  rusage usage{};
  getrusage(RUSAGE_SELF, &usage);
  return usage.ru_maxrss;
}

void replace_all(std::string& text, const std::string& from, const std::string& to) {
  for (std::size_t at = text.find(from); at != std::string::npos;
       at = text.find(from, at + to.size()))
    text.replace(at, from.size(), to);
}

/// The demo's methods and series with every stored name made the
/// instrument's own. Titers and calibrations are kept by titrant and
/// electrode name: instruments sharing a file must not share those names, or
/// one rack's samples would use another rack's titer and calibration.
/// Gravimetric checks are kept by burette name: with "burette 1" on every
/// rack, a value's record would name another rack's last check, and each
/// series would read the checks of all racks (a record more a round for
/// each rack).
struct LabTexts {
  std::string calcium_method, nickel_method, series;
  std::string edta, calcium_standard;
  std::string burette_1, burette_2;  ///< the rack's "burette 1" and "burette 2"
};

LabTexts lab_texts(int instrument) {
  char suffix[32];
  std::snprintf(suffix, sizeof suffix, " at bench %02d", instrument + 1);
  LabTexts t{
      cli::demo::kCalciumMethod, cli::demo::kNickelMethod, cli::demo::kSeries, "", "", "", ""};
  t.edta = std::string("EDTA 0.01 mol/L") + suffix;
  t.calcium_standard = std::string("calcium standard 0.01 mol/L") + suffix;
  t.burette_1 = std::string("burette 1") + suffix;
  t.burette_2 = std::string("burette 2") + suffix;
  for (std::string* text : {&t.calcium_method, &t.nickel_method, &t.series}) {
    replace_all(*text, "calcium in drinking water",
                std::string("calcium in drinking water") + suffix);
    replace_all(*text, "nickel in rinse water by back-titration",
                std::string("nickel in rinse water by back-titration") + suffix);
    replace_all(*text, "EDTA 0.01 mol/L", t.edta);
    replace_all(*text, "calcium standard 0.01 mol/L", t.calcium_standard);
    replace_all(*text, "calcium electrode 1", std::string("calcium electrode 1") + suffix);
    replace_all(*text, "Ferncombe Tuesday rack", std::string("Ferncombe Tuesday rack") + suffix);
    replace_all(*text, "burette = burette 1", "burette = " + t.burette_1);
    replace_all(*text, "burette = burette 2", "burette = " + t.burette_2);
  }
  return t;
}

/// Every series starts at the same invented morning; each series' "now" is
/// this plus its rack's virtual clock.
method::TimePoint lab_start() {
  return method::parse_utc("2026-12-08T06:00:00Z").value();
}

/// The lab's records before the first rack: methods, titrants, and the
/// calcium standard's titer from the day before (as `veq demo` does).
Result<void> prepare_lab(store::SqliteStore& store, const LabTexts& t) {
  for (const std::string* text : {&t.calcium_method, &t.nickel_method}) {
    auto m = method::parse_method(*text, "load method");
    if (!m)
      return m.error();
    if (auto saved = method::save_method(store, *m); !saved)
      return saved.error();
  }
  for (const std::string* name : {&t.edta, &t.calcium_standard}) {
    store::TitrantRecord r;
    r.name = *name;
    r.nominal_conc_mol_per_l = 0.0100;
    r.lot = "L-26-" + name->substr(name->size() - 2);
    r.prepared_utc = "2026-12-05T08:00:00.000Z";
    if (auto saved = store.save_titrant(r); !saved)
      return saved.error();
  }
  if (auto r = method::record_titer(store, t.calcium_standard, {0.010002, 0.009998, 0.010001},
                                    lab_start() - std::chrono::days{1});
      !r)
    return r.error();
  return {};
}

/// Counts points per run as they are reported (a run's points start at
/// index 0).
class CountingObserver final : public series::SeriesObserver {
 public:
  void on_point(const store::PointRecord& p) override {
    if (p.index == 0)
      per_run.push_back(0);
    if (!per_run.empty())
      ++per_run.back();
    ++total;
  }
  std::vector<std::int64_t> per_run;
  std::int64_t total = 0;
};

struct Round {
  /// In full for the first round only (compared with the same series run
  /// alone); later rounds keep the status, the reason and the run ids, so
  /// that the bench's own records do not grow the memory it measures.
  series::SeriesOutcome outcome;
  std::vector<std::int64_t> run_ids;  ///< the runs the outcome lists, sorted, once each
  long lock_mentions = 0;             ///< lock errors named by the series and its entries
  std::vector<std::int64_t> observed_per_run;
  std::int64_t observed_points = 0;
  long rss_kib_after = 0;
  long heap_kib_after = 0;
  long live_kib_after = 0;
  long long live_blocks_after = 0;
  long sqlite_kib_after = 0;
};

/// Lock errors a series outcome names (its reason and its entries' notes).
long lock_mentions(const series::SeriesOutcome& outcome) {
  std::string said = outcome.reason;
  for (const auto& e : outcome.entries)
    said += "\n" + e.note;
  long n = 0;
  for (const char* word : {"database is locked", "database table is locked", "busy"})
    for (std::size_t at = said.find(word); at != std::string::npos; at = said.find(word, at + 1))
      ++n;
  return n;
}

struct Instrument {
  int index = 0;
  std::uint64_t seed = 0;
  LabTexts texts;
  store::SqliteStore* store = nullptr;
  std::vector<Round> rounds;
  double virtual_h = 0.0;
  std::string error;
};

simulator::Scenario scenario_for(std::uint64_t seed) {
  auto s = simulator::parse_scenario(cli::demo::kScenario, "load scenario").value();
  s.seed = seed;
  return s;
}

/// Runs the instrument's series round after round until its virtual clock
/// has passed `hours` (only the first round when `hours` is 0).
void work(Instrument& in, double hours) {
  if (auto r = prepare_lab(*in.store, in.texts); !r) {
    in.error = "prepare: " + r.error().message;
    return;
  }
  auto parsed = series::parse_series(in.texts.series, "load series");
  if (!parsed) {
    in.error = parsed.error().message;
    return;
  }
  series::SeriesStores stores{*in.store, *in.store, *in.store};
  series::SeriesOptions options;
  options.start_time = lab_start();
  double virtual_s = 0.0;
  do {
    // A fresh rack for every round, its clock carried on: new vessels, and
    // the balance's pan emptied (five 10 mL deliveries a burette check: the
    // 220 g balance would be over its capacity after four rounds).
    cli::SimulatedRack rack;
    rack.clock.sleep_for(drivers::from_seconds(virtual_s));
    if (auto built = rack.build(scenario_for(in.seed)); !built) {
      in.error = built.error().message;
      return;
    }
    // The rack's burettes under the instrument's own names (see LabTexts).
    auto& burettes = rack.instruments->burettes;
    for (const auto& [rack_name, own_name] :
         {std::pair{"burette 1", &in.texts.burette_1}, {"burette 2", &in.texts.burette_2}})
      if (auto node = burettes.extract(rack_name))
        burettes[*own_name] = node.mapped();
    CountingObserver observer;
    Round round;
    round.outcome =
        series::run_series(*parsed, in.texts.series, *rack.instruments, stores, options, &observer);
    round.observed_per_run = std::move(observer.per_run);
    round.observed_points = observer.total;
    for (const auto& e : round.outcome.entries)
      round.run_ids.insert(round.run_ids.end(), e.run_ids.begin(), e.run_ids.end());
    std::sort(round.run_ids.begin(), round.run_ids.end());
    round.run_ids.erase(std::unique(round.run_ids.begin(), round.run_ids.end()),
                        round.run_ids.end());
    round.lock_mentions = lock_mentions(round.outcome);
    if (!in.rounds.empty()) {
      // Given back, not only emptied (`entries = {}` keeps the capacity:
      // about 5 KiB a round and instrument that looked like growth).
      std::vector<series::EntryOutcome>().swap(round.outcome.entries);
      round.observed_per_run.shrink_to_fit();
      round.run_ids.shrink_to_fit();
    }
    round.rss_kib_after = rss_kib();
    round.heap_kib_after = heap_in_use_kib();
    round.live_kib_after = live_objects_kib();
    round.live_blocks_after = live_blocks();
    round.sqlite_kib_after = sqlite_kib();
    virtual_s = rack.clock.now_s();
    const bool completed = round.outcome.status == store::SeriesStatus::completed;
    in.rounds.push_back(std::move(round));
    // A stopped series stops the instrument, as it would stop the lab's.
    if (!completed)
      break;
  } while (virtual_s < hours * 3600.0);
  in.virtual_h = virtual_s / 3600.0;
}

/// Checks that every run of a round stored all the points the observer saw
/// and its own point_count says. Returns the number of runs and adds
/// problems to `problems`.
std::int64_t check_points(store::SqliteStore& store, const Round& round, int instrument,
                          std::vector<std::string>& problems) {
  std::vector<std::int64_t> stored_per_run;
  for (auto id : round.run_ids) {
    auto run = store.load_run(id);
    auto points = store.load_points(id);
    if (!run || !points) {
      problems.push_back("instrument " + std::to_string(instrument + 1) + ": cannot read run " +
                         std::to_string(id));
      continue;
    }
    if (static_cast<std::int64_t>(points->size()) != run->point_count)
      problems.push_back("run " + std::to_string(id) + ": " + std::to_string(points->size()) +
                         " points stored, point_count " + std::to_string(run->point_count));
    if (!points->empty())
      stored_per_run.push_back(static_cast<std::int64_t>(points->size()));
  }
  // Runs the outcome lists are the series' determinations; the observer
  // also saw calibration and conditioning points, so compare the runs it
  // saw that the outcome lists, in order.
  std::vector<std::int64_t> seen = round.observed_per_run;
  std::size_t at = 0;
  for (auto n : stored_per_run) {
    while (at < seen.size() && seen[at] != n)
      ++at;
    if (at == seen.size()) {
      problems.push_back("instrument " + std::to_string(instrument + 1) + ": a run stored " +
                         std::to_string(n) +
                         " points that the observer did not see in that number");
      break;
    }
    ++at;
  }
  return static_cast<std::int64_t>(round.run_ids.size());
}

bool same_outcome(const series::SeriesOutcome& a, const series::SeriesOutcome& b,
                  std::string& why) {
  if (a.status != b.status || a.entries.size() != b.entries.size()) {
    why = "status or number of entries differ";
    return false;
  }
  for (std::size_t i = 0; i < a.entries.size(); ++i) {
    const auto& x = a.entries[i];
    const auto& y = b.entries[i];
    // Exact comparison on purpose: virtual time makes a series deterministic.
    if (x.label != y.label || x.status != y.status || x.values != y.values || x.mean != y.mean ||
        x.run_ids.size() != y.run_ids.size()) {
      why = "entry '" + x.label + "' differs";
      return false;
    }
  }
  return true;
}

std::int64_t count_rows(const std::string& path, const char* sql) {
  sqlite3* db = nullptr;
  std::int64_t n = -1;
  if (sqlite3_open_v2(path.c_str(), &db, SQLITE_OPEN_READONLY, nullptr) == SQLITE_OK) {
    sqlite3_stmt* s = nullptr;
    if (sqlite3_prepare_v2(db, sql, -1, &s, nullptr) == SQLITE_OK && sqlite3_step(s) == SQLITE_ROW)
      n = sqlite3_column_int64(s, 0);
    sqlite3_finalize(s);
  }
  sqlite3_close(db);
  return n;
}

void remove_database(const std::string& path) {
  for (const char* end : {"", "-wal", "-shm"})
    std::remove((path + end).c_str());
}

}  // namespace

// The counting allocation functions (see g_live_bytes). The nothrow and
// array forms of libstdc++ call these; the over-aligned forms go to
// aligned_alloc and free and stay uncounted on both sides.
void* operator new(std::size_t size) {
  void* p = std::malloc(size == 0 ? 1 : size);
  if (!p)
    throw std::bad_alloc();
  g_live_bytes.fetch_add(static_cast<long long>(malloc_usable_size(p)), std::memory_order_relaxed);
  g_live_blocks.fetch_add(1, std::memory_order_relaxed);
  return p;
}
void* operator new[](std::size_t size) {
  return ::operator new(size);
}
void operator delete(void* p) noexcept {
  if (!p)
    return;
  g_live_bytes.fetch_sub(static_cast<long long>(malloc_usable_size(p)), std::memory_order_relaxed);
  g_live_blocks.fetch_sub(1, std::memory_order_relaxed);
  std::free(p);
}
void operator delete[](void* p) noexcept {
  ::operator delete(p);
}
void operator delete(void* p, std::size_t) noexcept {
  ::operator delete(p);
}
void operator delete[](void* p, std::size_t) noexcept {
  ::operator delete(p);
}

int main(int argc, char** argv) {
  const int count = argc > 1 ? std::atoi(argv[1]) : 16;
  const double hours = argc > 2 ? std::atof(argv[2]) : 24.0;
  const std::string path = argc > 3 ? argv[3] : "veq-load.sqlite";
  const std::string connections = argc > 4 ? argv[4] : "shared";
  if (count < 1 || hours < 0.0 || (connections != "shared" && connections != "each")) {
    std::fprintf(stderr,
                 "usage: veq_load_bench [instruments] [simulated hours] [database] "
                 "[shared|each]\n");
    return 2;
  }
  if (sqlite3_config(SQLITE_CONFIG_LOG, sqlite_log, nullptr) != SQLITE_OK) {
    std::fprintf(stderr, "cannot install SQLite's error log\n");
    return 2;
  }
  remove_database(path);

  std::vector<std::unique_ptr<store::SqliteStore>> opened_stores;
  std::vector<Instrument> instruments(static_cast<std::size_t>(count));
  for (int i = 0; i < count; ++i) {
    auto& in = instruments[static_cast<std::size_t>(i)];
    in.index = i;
    in.seed = 20261208 + 7919 * static_cast<std::uint64_t>(i);
    in.texts = lab_texts(i);
    if (opened_stores.empty() || connections == "each") {
      auto opened = store::SqliteStore::open(path);
      if (!opened) {
        std::fprintf(stderr, "cannot open %s: %s\n", path.c_str(), opened.error().message.c_str());
        return 2;
      }
      opened_stores.push_back(std::move(*opened));
    }
    in.store = opened_stores.back().get();
  }
  const long rss_before_kib = rss_kib();
  const long heap_before_kib = heap_in_use_kib();
  const long long live_before_bytes = g_live_bytes.load();
  const long long live_blocks_before = live_blocks();

  const auto wall_start = std::chrono::steady_clock::now();
  {
    std::vector<std::thread> threads;
    for (auto& in : instruments)
      threads.emplace_back([&in, hours] { work(in, hours); });
    for (auto& t : threads)
      t.join();
  }
  const double wall_s =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - wall_start).count();
  const long peak_kib = peak_rss_kib();
  // With every instrument's thread ended (their caches given back to the
  // arenas), what is still in use is what the process keeps: the store, the
  // bench's records of each round.
  const long heap_after_kib = heap_in_use_kib();
  const long live_after_kib = live_objects_kib();
  const long long live_blocks_after = live_blocks();
  // What the threads left behind beside the stores and instruments made
  // before them: the bench's records of every round (Round).
  const long long records_bytes = g_live_bytes.load() - live_before_bytes;
  const long long records_blocks = live_blocks_after - live_blocks_before;
  const long sqlite_after_kib = sqlite_kib();
  // A statement that gives up with SQLITE_BUSY is not logged by SQLite
  // (the statement stays restartable), so lock errors are also counted from
  // what the series and their entries report.
  long busy_during_load = g_busy_errors.load();
  for (const auto& in : instruments)
    for (const auto& r : in.rounds)
      busy_during_load += r.lock_mentions;

  std::vector<std::string> problems;
  std::int64_t series_count = 0, runs = 0, observed = 0, completed = 0;
  std::size_t most_rounds = 0;
  double least_h = 1e300;
  for (auto& in : instruments) {
    if (!in.error.empty())
      problems.push_back("instrument " + std::to_string(in.index + 1) + ": " + in.error);
    most_rounds = std::max(most_rounds, in.rounds.size());
    least_h = std::min(least_h, in.virtual_h);
    for (const auto& r : in.rounds) {
      ++series_count;
      completed += r.outcome.status == store::SeriesStatus::completed;
      if (r.outcome.status != store::SeriesStatus::completed)
        problems.push_back("instrument " + std::to_string(in.index + 1) + ": series " +
                           store::series_status_name(r.outcome.status) + ": " + r.outcome.reason);
      observed += r.observed_points;
      runs += check_points(*in.store, r, in.index, problems);
    }
  }
  for (auto& in : instruments)
    in.store = nullptr;
  opened_stores.clear();
  const std::int64_t points_stored = count_rows(path, "SELECT COUNT(*) FROM points");
  const std::int64_t runs_stored = count_rows(path, "SELECT COUNT(*) FROM runs");
  const std::int64_t runs_not_finished =
      count_rows(path, "SELECT COUNT(*) FROM runs WHERE status IN (1, 5)");
  if (points_stored != observed)
    problems.push_back("points table holds " + std::to_string(points_stored) + ", observers saw " +
                       std::to_string(observed));

  // Memory after each round: the largest resident size any instrument saw
  // on finishing its round k.
  std::vector<long> rss_after_round(most_rounds, 0), heap_after_round(most_rounds, 0),
      live_after_round(most_rounds, 0), sqlite_after_round(most_rounds, 0);
  std::vector<long long> blocks_after_round(most_rounds, 0);
  for (const auto& in : instruments)
    for (std::size_t k = 0; k < in.rounds.size(); ++k) {
      rss_after_round[k] = std::max(rss_after_round[k], in.rounds[k].rss_kib_after);
      heap_after_round[k] = std::max(heap_after_round[k], in.rounds[k].heap_kib_after);
      live_after_round[k] = std::max(live_after_round[k], in.rounds[k].live_kib_after);
      blocks_after_round[k] = std::max(blocks_after_round[k], in.rounds[k].live_blocks_after);
      sqlite_after_round[k] = std::max(sqlite_after_round[k], in.rounds[k].sqlite_kib_after);
    }

  // Each instrument's first series again, alone, on a fresh file.
  int identical = 0;
  const auto alone_start = std::chrono::steady_clock::now();
  const std::string alone_path = path + ".alone";
  for (auto& in : instruments) {
    if (in.rounds.empty())
      continue;
    remove_database(alone_path);
    Instrument alone;
    alone.index = in.index;
    alone.seed = in.seed;
    alone.texts = in.texts;
    auto opened = store::SqliteStore::open(alone_path);
    if (!opened) {
      problems.push_back("cannot open " + alone_path + ": " + opened.error().message);
      continue;
    }
    alone.store = opened->get();
    work(alone, 0.0);
    std::string why;
    if (!alone.error.empty())
      problems.push_back("alone " + std::to_string(in.index + 1) + ": " + alone.error);
    else if (same_outcome(in.rounds.front().outcome, alone.rounds.front().outcome, why))
      ++identical;
    else
      problems.push_back("instrument " + std::to_string(in.index + 1) +
                         ": first series differs from the same series alone: " + why);
  }
  remove_database(alone_path);
  const double alone_s =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - alone_start).count();

  std::printf("| figure | value |\n|---|---|\n");
  std::printf("| instruments (threads on one file; connections) | %d (%s) |\n", count,
              connections == "shared" ? "one shared" : "one each");
  std::printf("| simulated hours asked / least reached | %.1f / %.1f |\n", hours, least_h);
  std::printf("| series (completed) | %" PRId64 " (%" PRId64 ") |\n", series_count, completed);
  std::printf("| runs stored (listed by the series' entries) | %" PRId64 " (%" PRId64 ") |\n",
              runs_stored, runs);
  std::printf("| runs left running or interrupted | %" PRId64 " |\n", runs_not_finished);
  std::printf("| points stored / seen by the observers | %" PRId64 " / %" PRId64 " |\n",
              points_stored, observed);
  std::printf("| wall time | %.1f s (%.0f simulated hours per wall second) |\n", wall_s,
              wall_s > 0 ? least_h * count / wall_s : 0.0);
  std::printf("| points stored per wall second | %.0f |\n",
              wall_s > 0 ? static_cast<double>(points_stored) / wall_s : 0.0);
  std::printf("| resident memory before the series | %.1f MiB (heap in use %.1f MiB) |\n",
              rss_before_kib / 1024.0, heap_before_kib / 1024.0);
  std::printf("| peak resident memory (ru_maxrss) | %.1f MiB |\n", peak_kib / 1024.0);
  for (std::size_t k = 0; k < rss_after_round.size(); ++k)
    std::printf(
        "| after round %zu: resident / heap in use / live C++ objects (blocks) / SQLite | "
        "%.1f / %.2f / %.2f (%lld) / %.2f MiB |\n",
        k + 1, rss_after_round[k] / 1024.0, heap_after_round[k] / 1024.0,
        live_after_round[k] / 1024.0, blocks_after_round[k], sqlite_after_round[k] / 1024.0);
  std::printf(
      "| after the threads ended: heap in use / live C++ objects (blocks) / SQLite | "
      "%.2f / %.2f (%lld) / %.2f MiB |\n",
      heap_after_kib / 1024.0, live_after_kib / 1024.0, live_blocks_after,
      sqlite_after_kib / 1024.0);
  std::printf(
      "| of it the bench's records of each round (left by the threads) | %.2f MiB, %lld blocks "
      "(%.2f KiB a series) |\n",
      static_cast<double>(records_bytes) / (1024.0 * 1024.0), records_blocks,
      series_count > 0
          ? static_cast<double>(records_bytes) / 1024.0 / static_cast<double>(series_count)
          : 0.0);
  std::printf("| SQLite busy/locked errors | %ld |\n", busy_during_load);
  std::printf("| first series identical to the same series alone | %d of %d (%.1f s alone) |\n",
              identical, count, alone_s);
  for (const auto& p : problems)
    std::printf("PROBLEM: %s\n", p.c_str());
  for (const auto& m : g_busy_messages)
    std::printf("SQLITE: %s\n", m.c_str());
  remove_database(path);
  return problems.empty() && busy_during_load == 0 && runs_not_finished == 0 ? 0 : 1;
}
