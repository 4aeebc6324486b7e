// The stop owed to a burette after a run cut off by a crash: sent before
// anything else at the next start, and kept on disk until the burette
// confirms it (controller/cli/stop_after_interruption.hpp).
#include <gtest/gtest.h>
#include <sys/wait.h>
#include <unistd.h>

#include <filesystem>
#include <memory>
#include <string>

#include "controller/cli/stop_after_interruption.hpp"
#include "controller/store/sqlite_store.hpp"
#include "simulator/bench.hpp"
#include "simulator/builtin_scenarios.hpp"
#include "tests/controller/simulated_trial.hpp"

namespace veq::cli {
namespace {

// A folder of this test's own, removed afterwards.
struct StopTestFolder {
  std::filesystem::path path;
  StopTestFolder() {
    const auto* info = ::testing::UnitTest::GetInstance()->current_test_info();
    path = std::filesystem::temp_directory_path() /
           ("veq-stop-test-" + std::to_string(getpid()) + "-" + info->name());
    std::filesystem::remove_all(path);
    std::filesystem::create_directories(path);
  }
  ~StopTestFolder() { std::filesystem::remove_all(path); }
  std::string file(const char* name) const { return (path / name).string(); }
};

// A child process starts a run on `burette` and dies without finishing it,
// as a killed veq would.
void leave_a_run_running(const std::string& path, const std::string& burette) {
  (void)store::SqliteStore::open(path);  // the schema, before the child writes
  const pid_t child = fork();
  ASSERT_GE(child, 0);
  if (child == 0) {
    auto s = store::SqliteStore::open(path);
    store::NewRun run;
    run.sample_id = "cut off";
    run.method_name = "any";
    run.method_json = "{}";
    run.burette = burette;
    const bool begun = s && (*s)->begin_run(run).has_value();
    _exit(begun ? 0 : 1);  // no destructors, no finish_run
  }
  int status = 0;
  ASSERT_EQ(waitpid(child, &status, 0), child);
  ASSERT_TRUE(WIFEXITED(status) && WEXITSTATUS(status) == 0);
}

struct OneBurette {
  drivers::VirtualClock clock;
  std::unique_ptr<simulator::SimulatedBench> bench;
  std::unique_ptr<drivers::DeviceLink> burette_link, sensor_link;
  std::unique_ptr<drivers::BuretteClient> burette;
  std::unique_ptr<drivers::PotentialSensorClient> sensor;
  std::unique_ptr<series::SeriesInstruments> instruments;

  OneBurette() {
    auto scenario =
        simulator::parse_scenario(simulator::builtin_scenario("demo_calcium"), "demo").value();
    controller::testing::connect_simulated_bench(*this, scenario, clock, "burette 1");
    instruments = std::make_unique<series::SeriesInstruments>(
        series::SeriesInstruments{clock, *sensor, {}, {}});
    instruments->burettes["burette 1"] = burette.get();
  }
};

TEST(StopAfterInterruption, AnUnreachableBuretteKeepsItsStopOwedUntilItAnswers) {
  StopTestFolder dir;
  const auto path = dir.file("owed.sqlite");
  OneBurette rack;
  leave_a_run_running(path, rack.burette->describe());

  // The next start marks the run interrupted, but its burette is silent:
  // the stop is not confirmed, the start is refused, the stop stays owed.
  auto first = store::SqliteStore::open(path).value();
  ASSERT_EQ(first->interrupted_on_open(), 1);
  simulator::FaultPlan silent;
  silent.kind = simulator::FaultKind::silence;
  ASSERT_TRUE(rack.bench->set_fault("burette", silent));
  auto refused = stop_burettes_after_interruption(*rack.instruments, *first);
  ASSERT_FALSE(refused.has_value());
  EXPECT_EQ(refused.error().kind, ErrorKind::timeout);
  EXPECT_NE(refused.error().message.find("burette 1 did not confirm the stop owed"),
            std::string::npos)
      << refused.error().message;
  first.reset();

  // A later start finds nothing left running (the run is already marked)
  // but the stop still owed; the burette answers again and confirms it.
  auto second = store::SqliteStore::open(path).value();
  EXPECT_EQ(second->interrupted_on_open(), 0);
  ASSERT_EQ(second->stops_owed()->size(), 1u);
  ASSERT_TRUE(rack.bench->set_fault("burette", simulator::FaultPlan{}));
  auto said = stop_burettes_after_interruption(*rack.instruments, *second);
  ASSERT_TRUE(said.has_value()) << said.error().message;
  ASSERT_EQ(said->size(), 1u);
  EXPECT_EQ((*said)[0], "burette 1 told to stop after an interrupted run");
  EXPECT_TRUE(second->stops_owed()->empty());
  // Settled: the start after it sends nothing.
  auto third = stop_burettes_after_interruption(*rack.instruments, *second);
  ASSERT_TRUE(third.has_value());
  EXPECT_TRUE(third->empty());
}

TEST(StopAfterInterruption, AStopOwedToAnotherRacksBuretteStaysOwed) {
  // Two instruments share the file: this rack stops its own burettes, and
  // leaves the other's stop for the veq that drives it.
  StopTestFolder dir;
  const auto path = dir.file("shared.sqlite");
  OneBurette rack;
  leave_a_run_running(path, "burette 1 on /dev/ttyUSB7");
  auto s = store::SqliteStore::open(path).value();
  ASSERT_EQ(s->interrupted_on_open(), 1);
  auto said = stop_burettes_after_interruption(*rack.instruments, *s);
  ASSERT_TRUE(said.has_value()) << said.error().message;
  ASSERT_EQ(said->size(), 2u);
  EXPECT_EQ((*said)[0], "burette 1 told to stop after an interrupted run");
  EXPECT_EQ((*said)[1],
            "run 1 owes a stop to 'burette 1 on /dev/ttyUSB7', which is not on this rack: it "
            "stays owed");
  auto owed = s->stops_owed();
  ASSERT_EQ(owed->size(), 1u);
  EXPECT_EQ((*owed)[0].burette, "burette 1 on /dev/ttyUSB7");
}

}  // namespace
}  // namespace veq::cli
