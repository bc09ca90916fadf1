// Storage faults against a real juncod: a read-only database, a full disk
// and a corrupted file. The daemon must refuse to start or stop the job with
// a clear error, turn the outputs off, and never report a success it did not
// achieve (no job "done" after a failed commit; errors, not fake results).
//
// Root bypasses file permissions, so read-only and full are made by the
// kernel: the database directory is a read-only bind mount, or a small tmpfs,
// inside a private mount namespace of the daemon (unshare -m); the test
// enters that namespace with nsenter to change it under the running daemon.
// Read-only under a running daemon: an ext4 image (loop device) forced
// read-only by an injected file system error.
#include "tests/support/campaign.hpp"

#include <catch2/catch.hpp>

#include <cstdlib>
#include <fstream>

using namespace junco;
using test::Json;
using Clock = std::chrono::steady_clock;
using namespace std::chrono_literals;
namespace fs = std::filesystem;

namespace {

// Runs a shell command line; its exit status.
int sh(const std::string& cmd) {
  const int rc = std::system(cmd.c_str());
  return WIFEXITED(rc) ? WEXITSTATUS(rc) : -1;
}

// juncod behind `unshare -m`, with `setup` (shell, "$D" = the database
// directory) run inside the new namespace first.
std::vector<std::string> in_namespace(const fs::path& db_dir, const std::string& setup) {
  return {"/usr/bin/unshare", "-m", "--propagation", "private", "/bin/sh", "-c",
          "D='" + db_dir.string() + "'; " + setup + " && exec \"$@\"", "sh"};
}

// Moves the bench's database into its own directory (the mount point).
fs::path own_db_dir(test::CampaignBench& b) {
  const fs::path d = b.dir() / "db";
  fs::create_directories(d);
  b.config()["paths"]["database"] = (d / "junco.db").string();
  b.write_config();
  return d;
}

// Waits for the daemon process to exit; its exit status or -1.
int wait_exit(test::CampaignBench& b, std::chrono::seconds limit = 10s) {
  return b.daemon()->wait(limit).value_or(-1);
}

// Polls job.get until the job leaves queued/running or the limit passes.
Json wait_settled(test::CampaignBench& b, long job, std::chrono::seconds limit) {
  const auto until = Clock::now() + limit;
  Json j;
  do {
    j = b.rpc("job.get", {{"job_id", job}});
    if (j["state"] != "running" && j["state"] != "queued") return j;
    std::this_thread::sleep_for(20ms);
  } while (Clock::now() < until);
  return j;
}

// Runs a job to done on a healthy daemon, then stops it cleanly.
void make_database_with_one_job(test::CampaignBench& b) {
  REQUIRE(b.start_daemon());
  const long job = b.rpc("job.submit", {{"plan", test::campaign_plan("STORE-A", 1, 1, 10)}})["job_id"];
  REQUIRE(wait_settled(b, job, 20s)["state"] == "done");
  b.daemon()->signal(SIGTERM);
  REQUIRE(wait_exit(b) == 0);
}

// Fills the filesystem of `dir` as seen from process `pid`'s mount namespace.
void fill_disk(pid_t pid, const fs::path& dir) {
  sh("nsenter -t " + std::to_string(pid) + " -m dd if=/dev/zero of='" + (dir / "filler").string() +
     "' bs=64k 2>/dev/null");
}

}  // namespace

TEST_CASE("a database on a read-only mount: juncod refuses to start with a clear error", "[storage]") {
  test::CampaignBench b("ro-start", 5);
  const fs::path d = own_db_dir(b);
  make_database_with_one_job(b);  // the file exists and holds a finished job
  // It may answer daemon.status while it starts (it listens before it opens
  // the bench; docs/daemon-core.md "Start-up order"), then it exits.
  (void)b.start_daemon(in_namespace(d, "mount --bind \"$D\" \"$D\" && mount -o remount,bind,ro \"$D\""));
  const int rc = wait_exit(b);
  const std::string log = b.log_text();
  INFO(log);
  CHECK(rc == 1);
  CHECK(log.find("cannot start") != std::string::npos);
  CHECK(log.find("readonly") + log.find("read-only") != 2 * std::string::npos);
  CHECK_FALSE(b.source_on());
}

TEST_CASE("the database turns read-only under a running job: the job is not done, the client is told, outputs off",
          "[storage]") {
  test::CampaignBench b("ro-mid", 6);
  const fs::path d = own_db_dir(b);
  // The kernel refuses to remount read-only a file system that has files open
  // for writing (EBUSY), and juncod keeps its database open. So the database
  // lives on an ext4 image mounted errors=remount-ro, and an injected file
  // system error (/sys/fs/ext4/DEV/trigger_fs_error) turns it read-only under
  // the daemon, as a failing disk would. Mounted in the test's own namespace
  // (SQLite cannot open a file through /proc/PID/root: it resolves the
  // symlink), lazily unmounted on the way out.
  const fs::path img = b.dir() / "db.img";
  REQUIRE(sh("truncate -s 16M '" + img.string() + "' && mkfs.ext4 -q '" + img.string() + "'") == 0);
  REQUIRE(sh("mount -o loop,errors=remount-ro '" + img.string() + "' '" + d.string() + "'") == 0);
  struct Unmount {
    fs::path dir;
    ~Unmount() { sh("umount -l '" + dir.string() + "'"); }
  } unmount{d};
  REQUIRE(b.start_daemon());
  const long job = b.rpc("job.submit", {{"plan", test::campaign_plan("STORE-B", 1, 2, 400)}})["job_id"];
  // Let some points commit, then remount read-only under the daemon.
  for (int i = 0; i < 500 && b.rpc("job.get", {{"job_id", job}})["points_done"].get<long>() < 20; ++i) std::this_thread::sleep_for(5ms);
  REQUIRE(sh("echo 1 > /sys/fs/ext4/$(basename $(findmnt -n -o SOURCE '" + d.string() + "'))/trigger_fs_error") == 0);
  const fs::path db = d / "junco.db";
  const long at_fault = test::committed_points(db);
  REQUIRE(at_fault >= 0);
  const Json j = wait_settled(b, job, 20s);
  INFO(j.dump());
  CHECK(j["state"] != "done");
  CHECK(j["state"] != "running");  // the client is told the job stopped, not left waiting
  const std::string error = j["error"].is_string() ? j["error"].get<std::string>() : "";
  CHECK(error.find("readonly") + error.find("read-only") != 2 * std::string::npos);  // as at start
  CHECK_FALSE(b.source_on());
  CHECK(b.scanner_slot() == 0);
  // Nothing was reported that the file does not hold.
  CHECK(j["points_done"].get<long>() <= test::committed_points(db));
  CHECK(test::committed_points(db) >= at_fault);
  // A new submission is refused with an error, not accepted into a store that cannot keep it.
  const Json r = b.call("job.submit", {{"plan", test::campaign_plan("STORE-B2", 3, 1, 5)}});
  INFO(r.dump());
  CHECK(r.contains("error"));
}

TEST_CASE("the disk fills under a running job: the job is not done, the error says so, outputs off", "[storage]") {
  test::CampaignBench b("full", 7);
  const fs::path d = own_db_dir(b);
  REQUIRE(b.start_daemon(in_namespace(d, "mount -t tmpfs -o size=2m tmpfs \"$D\"")));
  const long job = b.rpc("job.submit", {{"plan", test::campaign_plan("STORE-C", 1, 2, 400)}})["job_id"];
  for (int i = 0; i < 500 && b.rpc("job.get", {{"job_id", job}})["points_done"].get<long>() < 20; ++i) std::this_thread::sleep_for(5ms);
  fill_disk(b.daemon()->pid(), d);
  const Json j = wait_settled(b, job, 20s);
  INFO(j.dump());
  CHECK(j["state"] != "done");
  CHECK(j["state"] != "running");
  const std::string error = j["error"].is_string() ? j["error"].get<std::string>() : "";
  CHECK((error.find("full") != std::string::npos || error.find("disk") != std::string::npos));
  CHECK(j["points_done"].get<long>() < 800);
  CHECK_FALSE(b.source_on());
  CHECK(b.scanner_slot() == 0);
}

TEST_CASE("a full disk at start: juncod refuses to start", "[storage]") {
  test::CampaignBench b("full-start", 8);
  const fs::path d = own_db_dir(b);
  // It may answer daemon.status while it starts (it listens before it opens
  // the bench; docs/daemon-core.md "Start-up order"), then it exits.
  (void)b.start_daemon(
      in_namespace(d, "mount -t tmpfs -o size=64k tmpfs \"$D\" && (dd if=/dev/zero of=\"$D/filler\" bs=4k 2>/dev/null; true)"));
  CHECK(wait_exit(b) == 1);
  const std::string log = b.log_text();
  INFO(log);
  CHECK(log.find("cannot start") != std::string::npos);
  CHECK(log.find("full") != std::string::npos);
}

TEST_CASE("a corrupted database file: juncod refuses to start and names the problem", "[storage]") {
  for (const long page : {1L, 3L}) {  // 1: the header page; 3: a table page
    DYNAMIC_SECTION("page " << page << " overwritten") {
      test::CampaignBench b("corrupt", 9);
      make_database_with_one_job(b);
      REQUIRE_FALSE(fs::exists(b.dir() / "junco.db-wal"));  // checkpointed on clean stop: the file is all there is
      {
        std::fstream f(b.db_path(), std::ios::in | std::ios::out | std::ios::binary);
        REQUIRE(f);
        const long page_size = 4096;  // SQLite's default page size
        f.seekp((page - 1) * page_size + (page == 1 ? 0 : 0));
        std::string junk(page_size, '\0');
        for (std::size_t k = 0; k < junk.size(); ++k) junk[k] = static_cast<char>(0xA5 ^ (k * 31));
        f.write(junk.data(), static_cast<std::streamsize>(junk.size()));
      }
      // It may answer daemon.status while it starts, then it exits.
      (void)b.start_daemon();
      CHECK(wait_exit(b) == 1);
      const std::string log = b.log_text();
      INFO(log);
      CHECK(log.find("cannot start") != std::string::npos);
      CHECK((log.find("malformed") != std::string::npos || log.find("not a database") != std::string::npos ||
             log.find("corrupt") != std::string::npos));
    }
  }
}
