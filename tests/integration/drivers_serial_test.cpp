// Each transport end to end against junco-sim: raw TCP, the sim's
// pseudo-terminal through the termios path (what a user pointing
// serial:/dev/pts/N gets), the same pty through libserialport (in a private
// mount namespace with the pty bind-mounted over a real tty node, plus the
// tests/support/serial_pty_shim LD_PRELOAD interposer), and USBTMC against a
// stand-in character device (the raw pty: opened by path, plain read/write).
#include "drivers/errors.hpp"
#include "drivers/transport.hpp"
#include "tests/integration/drivers_test_support.hpp"

#include <catch2/catch.hpp>

#include <cstdlib>
#include <dlfcn.h>
#include <filesystem>
#include <sys/mount.h>
#include <sys/stat.h>
#include <unistd.h>

using namespace junco::drivers;
using junco::test::SimProcess;
using junco::test::sim_spec;
namespace fs = std::filesystem;

namespace {

std::string path_of(const std::string& serial_address) { return serial_address.substr(std::string("serial:").size()); }

std::string idn_over(const std::string& address) {
  auto t = open_transport(address);
  t->write_message("*IDN?");
  return t->read_message(std::chrono::seconds(2));
}

// A tty node that libserialport will accept: listed in /sys/class/tty and
// present in /dev as a character device. Serial ports first.
std::string find_tty_node() {
  std::vector<std::string> names;
  for (const auto& e : fs::directory_iterator("/sys/class/tty")) names.push_back(e.path().filename().string());
  std::sort(names.begin(), names.end(), [](const std::string& a, const std::string& b) {
    bool sa = a.rfind("ttyS", 0) == 0, sb = b.rfind("ttyS", 0) == 0;
    return sa != sb ? sa : a < b;
  });
  for (const auto& n : names) {
    if (n.rfind("tty", 0) != 0 || n == "tty") continue;  // /dev/tty is the controlling terminal
    struct stat st {};
    std::string dev = "/dev/" + n;
    if (::stat(dev.c_str(), &st) == 0 && S_ISCHR(st.st_mode)) return dev;
  }
  return "";
}

std::string self_exe() { return fs::read_symlink("/proc/self/exe").string(); }

// LD_PRELOAD for the namespace child. A dynamically linked AddressSanitizer
// runtime (GCC's default) refuses to start unless it is the first object
// loaded after the program, so under ASan the runtime this executable uses
// goes first and the shim after it. The shim's ioctl is then reached through
// ASan's interceptor, which looks the real call up with RTLD_NEXT and so finds
// the shim before libc. A statically linked runtime (clang's default) needs
// nothing preloaded.
std::string preload_list(const std::string& shim) {
  if constexpr (junco::test::kAddressSanitizer) {
    Dl_info info{};
    void* init = ::dlsym(RTLD_DEFAULT, "__asan_init");
    if (init && ::dladdr(init, &info) != 0 && info.dli_fname) {
      const std::string runtime = info.dli_fname;
      if (runtime.find("asan") != std::string::npos && runtime.find(".so") != std::string::npos) return runtime + ":" + shim;
    }
  }
  return shim;
}

}  // namespace

TEST_CASE("raw TCP transport talks to junco-sim", "[drivers][integration][transport]") {
  SimProcess sim({"--family", "source=psu-compact"});
  CHECK(idn_over(sim.endpoint("source")) == "junco-sim,PSU-C2,SIM-S002,2.1");
  auto t = open_transport(sim.endpoint("source"));
  CHECK_THAT(t->describe(), Catch::StartsWith("tcp 127.0.0.1:"));
  // Nothing sent: the read deadline holds.
  auto t0 = std::chrono::steady_clock::now();
  CHECK_THROWS_MATCHES(t->read_message(std::chrono::milliseconds(150)), DriverError,
                       Catch::Predicate<DriverError>([](const DriverError& e) { return e.kind() == ErrorKind::timeout; }));
  CHECK(std::chrono::steady_clock::now() - t0 < std::chrono::milliseconds(1000));
  t->reconnect();
  t->write_message("VOUT?");
  CHECK_FALSE(t->read_message(std::chrono::seconds(2)).empty());
}

TEST_CASE("serial:/dev/pts/N gets the termios path, logged, and works", "[drivers][integration][transport]") {
  SimProcess sim({"--serial", "meter", "--family", "meter=dmm-prefixed"});
  const std::string address = sim.endpoint("meter");
  REQUIRE_THAT(address, Catch::StartsWith("serial:/dev/pts/"));
  CHECK(idn_over(address) == "junco-sim,DMM-P7,SIM-M002,3.0");

  junco::test::TrafficLog log;
  auto meter = open_meter(sim_spec(sim, "meter", &log));
  CHECK(meter->identify().model == "DMM-P7");
  CHECK(log.contains("(termios, pty)"));  // the choice is in the traffic log
  meter->set_range(MeterFunction::dc_voltage, 10);
  double v = meter->measure_dc_voltage_v();  // "+x.xxxxxxE-xxVDC" parsed
  CHECK(std::abs(v) < 10);
}

TEST_CASE("a bare pty through libserialport is a clear error, not a hang", "[drivers][integration][transport]") {
  SimProcess sim({"--serial", "meter"});
  try {
    open_transport(sim.endpoint("meter") + "?via=libserialport");
    FAIL("libserialport opened a bare pty");
  } catch (const DriverError& e) {
    CHECK(e.kind() == ErrorKind::disconnected);
    CHECK_THAT(std::string(e.what()), Catch::Contains("libserialport"));
  }
}

TEST_CASE("USBTMC transport against a stand-in character device", "[drivers][integration][transport]") {
  // The sim's raw pty stands in for /dev/usbtmcN: the transport sees that
  // USBTMC_IOCTL_SET_TIMEOUT is refused and waits with poll().
  SimProcess sim({"--serial", "scanner", "--family", "scanner=relay-bank"});
  const std::string pty = path_of(sim.endpoint("scanner"));
  auto t = open_transport("usbtmc:" + pty);
  CHECK_THAT(t->describe(), Catch::Contains("usbtmc " + pty) && Catch::Contains("stand-in"));
  t->write_message("*IDN?");
  CHECK(t->read_message(std::chrono::seconds(2)) == "junco-sim,RB-8,SIM-X002,1.4");

  auto spec = sim_spec(sim, "scanner");
  spec.address = "usbtmc:" + pty;
  auto scanner = open_scanner(spec);
  scanner->connect_slot(4);
  CHECK(sim.control("state?")["scanner"]["slot"].get<int>() == 4);
  CHECK_THROWS_AS(open_transport("usbtmc:/dev/usbtmc-none"), DriverError);
}

TEST_CASE("libserialport end to end: the sim's pty bind-mounted over a tty node", "[drivers][integration][transport]") {
  if (::geteuid() != 0) {
    WARN("not root: cannot create a mount namespace; the libserialport end-to-end test needs root (CI runs as root)");
    return;
  }
  const std::string node = find_tty_node();
  REQUIRE_FALSE(node.empty());
  const std::string shim = std::string(JUNCO_BINARY_DIR) + "/tests/support/libjunco_serial_pty_shim.so";
  REQUIRE(fs::exists(shim));

  SimProcess sim({"--seed", "9", "--settle-ms", "0", "--serial", "meter", "--family", "meter=scpi-dmm"});
  // Bias a part over TCP so the meter has something true to read.
  auto scanner = open_scanner(sim_spec(sim, "scanner"));
  auto source = open_source(sim_spec(sim, "source"));
  scanner->connect_slot(1);
  source->set_current_limit_a(0.05);
  source->set_voltage_v(2);
  source->set_output(true);

  // Re-run this executable, only the hidden child case, inside
  // `unshare -m` (a private mount namespace: the bind mount is invisible
  // outside) with the shim preloaded.
  junco::test::ChildProcess child({"/usr/bin/unshare", "-m", "--propagation", "private", "/usr/bin/env",
                                   "LD_PRELOAD=" + preload_list(shim), "JUNCO_NS_PTY=" + path_of(sim.endpoint("meter")),
                                   "JUNCO_NS_NODE=" + node, "JUNCO_NS_CONTROL=" + sim.endpoint("control"),
                                   self_exe(), "[.serial-ns-child]"});
  std::string output;
  while (auto line = child.read_line(std::chrono::seconds(20))) output += *line + "\n";
  auto code = child.wait(std::chrono::seconds(20));
  INFO("child output:\n" << output);
  REQUIRE(code);
  CHECK(*code == 0);
  CHECK_THAT(output, Catch::Contains("All tests passed"));
}

// Runs only inside the namespace started above.
TEST_CASE("serial namespace child", "[.serial-ns-child]") {
  const char* pty = std::getenv("JUNCO_NS_PTY");
  const char* node = std::getenv("JUNCO_NS_NODE");
  const char* control = std::getenv("JUNCO_NS_CONTROL");
  REQUIRE(pty);
  REQUIRE(node);
  REQUIRE(control);
  REQUIRE(::mount(pty, node, nullptr, MS_BIND, nullptr) == 0);

  auto raw = open_transport(std::string("serial:") + node + "?baud=115200&bits=8&parity=none&stop=1&flow=none&via=libserialport");
  CHECK_THAT(raw->describe(), Catch::Contains("(libserialport) 115200 8N1"));
  raw->write_message("*IDN?");
  CHECK(raw->read_message(std::chrono::seconds(2)) == "junco-sim,DMM-6,SIM-M001,1.0");
  raw->close();

  InstrumentSpec spec;
  spec.name = "meter";
  spec.address = std::string("serial:") + node + "?via=libserialport";
  spec.dialect_path = junco::test::dialect_file("scpi-dmm");
  auto meter = open_meter(spec);
  meter->set_range(MeterFunction::dc_voltage, 0);
  const double v = meter->measure_dc_voltage_v();
  auto ctl = open_transport(control);
  ctl->write_message("state?");
  auto state = nlohmann::json::parse(ctl->read_message(std::chrono::seconds(2)));
  CHECK(v == Approx(state["diode"]["v"].get<double>()).epsilon(0.01));
}
