// Test harness for MQTT integration tests: child processes, a real mosquitto broker on a
// free 127.0.0.1 port, and mosquitto_sub / mosquitto_pub as independent clients that
// check what is on the wire.
//
// Everything waits on conditions with deadlines (WaitFor), never on bare sleeps. Child
// processes are killed and reaped when their handle is destroyed, so a failing test
// cannot leave a broker behind.
//
// Thread-safety: test-thread only. Ownership: each object owns its process or directory.
#pragma once

#include <arpa/inet.h>
#include <fcntl.h>
#include <netinet/in.h>
#include <spawn.h>
#include <sys/socket.h>
#include <sys/stat.h>
#include <sys/types.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <csignal>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <memory>
#include <sstream>
#include <string>
#include <thread>
#include <utility>
#include <vector>

#include "core/status.h"

extern char** environ;

namespace nightjar::testing {

using std::chrono::milliseconds;

// Polls `condition` every few milliseconds until it holds or `timeout` passes; returns
// whether it held.
template <typename Condition>
bool WaitFor(Condition condition, milliseconds timeout = milliseconds(5000)) {
  const auto deadline = std::chrono::steady_clock::now() + timeout;
  while (true) {
    if (condition()) return true;
    if (std::chrono::steady_clock::now() >= deadline) return condition();
    std::this_thread::sleep_for(milliseconds(2));
  }
}

inline std::string ReadFile(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::ostringstream text;
  text << in.rdbuf();
  return text.str();
}

inline void WriteFile(const std::string& path, const std::string& text) {
  const std::string tmp = path + ".tmp";
  {
    std::ofstream out(tmp, std::ios::binary | std::ios::trunc);
    out << text;
  }
  ::chmod(tmp.c_str(), 0644);  // the broker may run as its own user
  std::filesystem::rename(tmp, path);
}

// A fresh directory under /tmp, world-readable (a broker started as root drops to the
// "mosquitto" user and must still read its files), removed with its contents.
class TempDir {
 public:
  TempDir() {
    std::string pattern =
        (std::filesystem::temp_directory_path() / "nightjar-mqtt-XXXXXX").string();
    if (::mkdtemp(pattern.data()) != nullptr) {
      path_ = pattern;
      ::chmod(path_.c_str(), 0755);
    }
  }
  ~TempDir() {
    std::error_code ignored;
    if (!path_.empty()) std::filesystem::remove_all(path_, ignored);
  }
  TempDir(const TempDir&) = delete;
  TempDir& operator=(const TempDir&) = delete;
  const std::string& path() const { return path_; }
  std::string File(const std::string& name) const { return path_ + "/" + name; }

 private:
  std::string path_;
};

// A child process with stdout and stderr appended to a file and stdin from a file
// (default /dev/null). Killed (SIGKILL) and reaped on destruction if still running.
class ChildProcess {
 public:
  static core::Result<std::unique_ptr<ChildProcess>> Spawn(
      const std::vector<std::string>& argv, const std::string& output_path,
      const std::string& input_path = "/dev/null") {
    posix_spawn_file_actions_t actions;
    posix_spawn_file_actions_init(&actions);
    posix_spawn_file_actions_addopen(&actions, 0, input_path.c_str(), O_RDONLY, 0);
    posix_spawn_file_actions_addopen(&actions, 1, output_path.c_str(),
                                     O_WRONLY | O_CREAT | O_APPEND, 0644);
    posix_spawn_file_actions_adddup2(&actions, 1, 2);
    std::vector<char*> args;
    args.reserve(argv.size() + 1);
    for (const std::string& arg : argv) args.push_back(const_cast<char*>(arg.c_str()));
    args.push_back(nullptr);
    pid_t pid = -1;
    const int rc = ::posix_spawnp(&pid, args[0], &actions, nullptr, args.data(), environ);
    posix_spawn_file_actions_destroy(&actions);
    if (rc != 0) {
      return core::Status::Unavailable("cannot start " + argv[0] + ": " + std::to_string(rc));
    }
    return std::unique_ptr<ChildProcess>(new ChildProcess(pid));
  }

  ~ChildProcess() { Kill(); }
  ChildProcess(const ChildProcess&) = delete;
  ChildProcess& operator=(const ChildProcess&) = delete;

  pid_t pid() const { return pid_; }

  bool Running() {
    if (pid_ <= 0) return false;
    int status = 0;
    const pid_t r = ::waitpid(pid_, &status, WNOHANG);
    if (r == pid_) {
      exit_status_ = status;
      pid_ = -1;
      return false;
    }
    return r == 0;
  }

  // Waits until the process exits; false if it is still running after `timeout`.
  bool WaitExit(milliseconds timeout) {
    return WaitFor([this] { return !Running(); }, timeout);
  }
  // Exit code if it exited normally, else -1.
  int exit_code() const { return WIFEXITED(exit_status_) ? WEXITSTATUS(exit_status_) : -1; }

  void Signal(int sig) {
    if (pid_ > 0) ::kill(pid_, sig);
  }
  // SIGTERM, then SIGKILL if it has not exited after `grace`.
  void Terminate(milliseconds grace = milliseconds(3000)) {
    if (!Running()) return;
    Signal(SIGTERM);
    if (!WaitExit(grace)) Kill();
  }
  void Kill() {
    if (!Running()) return;
    Signal(SIGKILL);
    int status = 0;
    ::waitpid(pid_, &status, 0);
    exit_status_ = status;
    pid_ = -1;
  }

 private:
  explicit ChildProcess(pid_t pid) : pid_(pid) {}
  pid_t pid_;
  int exit_status_ = -1;
};

// Runs a command to the end (with a deadline); OK if it exited with code 0.
inline core::Status RunCommand(const std::vector<std::string>& argv, const std::string& output_path,
                               const std::string& input_path = "/dev/null",
                               milliseconds timeout = milliseconds(10000)) {
  core::Result<std::unique_ptr<ChildProcess>> child =
      ChildProcess::Spawn(argv, output_path, input_path);
  if (!child.ok()) return child.status();
  if (!(*child)->WaitExit(timeout)) {
    return core::Status::Unavailable(argv[0] + " did not finish in time");
  }
  if ((*child)->exit_code() != 0) {
    return core::Status::Internal(argv[0] + " exited with " +
                                  std::to_string((*child)->exit_code()) + ": " +
                                  ReadFile(output_path));
  }
  return core::Status::Ok();
}

// A port on 127.0.0.1 that was free a moment ago: bind to port 0, read it, close.
inline int FreeLocalPort() {
  const int fd = ::socket(AF_INET, SOCK_STREAM, 0);
  if (fd < 0) return -1;
  sockaddr_in addr{};
  addr.sin_family = AF_INET;
  addr.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
  addr.sin_port = 0;
  socklen_t len = sizeof(addr);
  int port = -1;
  if (::bind(fd, reinterpret_cast<sockaddr*>(&addr), sizeof(addr)) == 0 &&
      ::getsockname(fd, reinterpret_cast<sockaddr*>(&addr), &len) == 0) {
    port = ntohs(addr.sin_port);
  }
  ::close(fd);
  return port;
}

// Whether something accepts TCP connections on 127.0.0.1:port.
inline bool Accepts(int port) {
  const int fd = ::socket(AF_INET, SOCK_STREAM, 0);
  if (fd < 0) return false;
  sockaddr_in addr{};
  addr.sin_family = AF_INET;
  addr.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
  addr.sin_port = htons(static_cast<std::uint16_t>(port));
  const bool ok = ::connect(fd, reinterpret_cast<sockaddr*>(&addr), sizeof(addr)) == 0;
  ::close(fd);
  return ok;
}

inline std::string MosquittoBinary() {
  for (const char* path : {"/usr/sbin/mosquitto", "/usr/local/sbin/mosquitto"}) {
    if (::access(path, X_OK) == 0) return path;
  }
  return "mosquitto";  // from PATH
}

// A mosquitto broker on 127.0.0.1 with a minimal config written to its own directory:
// one listener, anonymous clients allowed (unless `extra_config` says otherwise),
// persistence off. Its log goes to broker.log in that directory.
class TestBroker {
 public:
  // Starts on a free port and waits until it accepts connections.
  static core::Result<std::unique_ptr<TestBroker>> Start(const std::string& extra_config = "") {
    std::unique_ptr<TestBroker> broker(new TestBroker());
    if (broker->dir_.path().empty()) return core::Status::Unavailable("no temp dir");
    core::Status last = core::Status::Unavailable("no free port");
    for (int attempt = 0; attempt < 3; ++attempt) {  // the free port may be taken meanwhile
      broker->port_ = FreeLocalPort();
      if (broker->port_ <= 0) continue;
      last = broker->Launch(extra_config);
      if (last.ok()) return broker;
    }
    return last;
  }

  ~TestBroker() { Stop(); }

  int port() const { return port_; }
  const TempDir& dir() const { return dir_; }
  std::string log() const { return ReadFile(dir_.File("broker.log")); }
  bool running() { return process_ && process_->Running(); }

  // Stops the broker (SIGTERM, then SIGKILL) and waits for it to exit.
  void Stop() {
    if (process_) process_->Terminate();
    process_.reset();
  }
  // Starts it again on the same port, with a new config.
  core::Status Restart(const std::string& extra_config = "") {
    Stop();
    return Launch(extra_config);
  }
  // Makes the broker reload its config file (password file included).
  void Reload() {
    if (process_) process_->Signal(SIGHUP);
  }

 private:
  TestBroker() = default;

  core::Status Launch(const std::string& extra_config) {
    const std::string conf = dir_.File("mosquitto.conf");
    WriteFile(conf, "listener " + std::to_string(port_) + " 127.0.0.1\n" +
                        (extra_config.find("allow_anonymous") == std::string::npos
                             ? "allow_anonymous true\n"
                             : "") +
                        "persistence false\n" + extra_config);
    core::Result<std::unique_ptr<ChildProcess>> child =
        ChildProcess::Spawn({MosquittoBinary(), "-c", conf}, dir_.File("broker.log"));
    if (!child.ok()) return child.status();
    process_ = std::move(child).value();
    const int port = port_;
    ChildProcess* process = process_.get();
    const bool up = WaitFor([&] { return Accepts(port) || !process->Running(); });
    if (!up || !process_->Running()) {
      process_.reset();
      return core::Status::Unavailable("mosquitto did not start on port " + std::to_string(port_) +
                                       ": " + log());
    }
    return core::Status::Ok();
  }

  TempDir dir_;
  int port_ = -1;
  std::unique_ptr<ChildProcess> process_;
};

// `mosquitto_sub` as an outside witness: line-buffered (stdbuf -oL) with -d so that its
// SUBACK shows, every message printed as "MSG <retain> <qos> <topic> <payload>".
class Witness {
 public:
  // Subscribes to `filter` at QoS 1 and exits after `count` messages (or 30 s).
  static core::Result<std::unique_ptr<Witness>> Start(const TestBroker& broker,
                                                      const std::string& filter, int count,
                                                      const std::vector<std::string>& extra = {}) {
    static int serial = 0;
    std::unique_ptr<Witness> w(new Witness());
    w->output_ = broker.dir().File("witness-" + std::to_string(++serial) + ".out");
    std::vector<std::string> argv = {"stdbuf",
                                     "-oL",
                                     "mosquitto_sub",
                                     "-h",
                                     "127.0.0.1",
                                     "-p",
                                     std::to_string(broker.port()),
                                     "-i",
                                     "cw2-witness-" + std::to_string(serial),
                                     "-q",
                                     "1",
                                     "-d",
                                     "-t",
                                     filter,
                                     "-C",
                                     std::to_string(count),
                                     "-W",
                                     "30",
                                     "-F",
                                     "MSG %r %q %t %p"};
    argv.insert(argv.end(), extra.begin(), extra.end());
    core::Result<std::unique_ptr<ChildProcess>> child = ChildProcess::Spawn(argv, w->output_);
    if (!child.ok()) return child.status();
    w->process_ = std::move(child).value();
    return w;
  }

  // Waits for the broker's SUBACK to the witness's subscription.
  bool WaitSubscribed(milliseconds timeout = milliseconds(5000)) {
    return WaitFor(
        [this] { return ReadFile(output_).find("Subscribed (mid") != std::string::npos; }, timeout);
  }
  bool WaitExit(milliseconds timeout = milliseconds(10000)) { return process_->WaitExit(timeout); }
  // "<retain> <qos> <topic> <payload>" for every message so far, in arrival order.
  std::vector<std::string> Messages() const {
    std::vector<std::string> out;
    std::istringstream in(ReadFile(output_));
    for (std::string line; std::getline(in, line);) {
      if (line.rfind("MSG ", 0) == 0) out.push_back(line.substr(4));
    }
    return out;
  }
  std::string output() const { return ReadFile(output_); }

 private:
  Witness() = default;
  std::string output_;
  std::unique_ptr<ChildProcess> process_;
};

}  // namespace nightjar::testing
