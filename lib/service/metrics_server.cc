#include "service/metrics_server.h"

#include <arpa/inet.h>
#include <fcntl.h>
#include <netinet/in.h>
#include <poll.h>
#include <sys/socket.h>
#include <unistd.h>

#include <cerrno>
#include <charconv>
#include <chrono>
#include <system_error>

namespace nightjar::service {
namespace {

std::string ErrnoText(int error) { return std::generic_category().message(error); }

core::Status BadListen(std::string_view text, std::string_view what) {
  return core::Status::InvalidArgument(std::string("'").append(text).append("': ").append(what));
}

using SteadyClock = std::chrono::steady_clock;

int MillisecondsLeft(SteadyClock::time_point deadline) {
  const auto left =
      std::chrono::duration_cast<std::chrono::milliseconds>(deadline - SteadyClock::now());
  return left.count() <= 0 ? 0 : static_cast<int>(left.count());
}

// Reads until the blank line that ends the header block. False on timeout, close, error
// or when the block would exceed `limit` (then *too_big is set).
bool ReadRequest(int fd, std::size_t limit, SteadyClock::time_point deadline, std::string* out,
                 bool* too_big) {
  char buffer[2048];
  while (out->find("\r\n\r\n") == std::string::npos) {
    if (out->size() >= limit) {
      *too_big = true;
      return false;
    }
    pollfd p{fd, POLLIN, 0};
    const int ready = poll(&p, 1, MillisecondsLeft(deadline));
    if (ready <= 0) return false;
    const ssize_t n = recv(fd, buffer, sizeof buffer, 0);
    if (n <= 0) return false;
    out->append(buffer, static_cast<std::size_t>(n));
  }
  return true;
}

void WriteAll(int fd, std::string_view data, SteadyClock::time_point deadline) {
  while (!data.empty()) {
    pollfd p{fd, POLLOUT, 0};
    if (poll(&p, 1, MillisecondsLeft(deadline)) <= 0) return;
    const ssize_t n = send(fd, data.data(), data.size(), MSG_NOSIGNAL);
    if (n <= 0) return;
    data.remove_prefix(static_cast<std::size_t>(n));
  }
}

std::string Response(std::string_view status, std::string_view content_type,
                     std::string_view body) {
  std::string r("HTTP/1.1 ");
  r.append(status).append("\r\nContent-Type: ").append(content_type);
  r.append("\r\nContent-Length: ").append(std::to_string(body.size()));
  if (status.substr(0, 3) == "405") r.append("\r\nAllow: GET");
  r.append("\r\nConnection: close\r\n\r\n").append(body);
  return r;
}

constexpr std::string_view kMetricsType =
    "application/openmetrics-text; version=1.0.0; charset=utf-8";
constexpr std::string_view kPlainType = "text/plain; charset=utf-8";

}  // namespace

core::Result<ListenAddress> ParseListenAddress(std::string_view text) {
  const std::size_t colon = text.rfind(':');
  if (colon == std::string_view::npos) return BadListen(text, "expected HOST:PORT");
  ListenAddress address;
  address.host = std::string(text.substr(0, colon));
  in_addr parsed{};
  if (inet_pton(AF_INET, address.host.c_str(), &parsed) != 1) {
    return BadListen(text, "host must be an IPv4 address such as 127.0.0.1");
  }
  const std::string_view p = text.substr(colon + 1);
  int port = -1;
  const auto [end, ec] = std::from_chars(p.data(), p.data() + p.size(), port);
  if (p.empty() || ec != std::errc() || end != p.data() + p.size() || port < 0 || port > 65535) {
    return BadListen(text, "port must be a number in 0..65535");
  }
  address.port = port;
  return address;
}

core::Result<std::unique_ptr<MetricsServer>> MetricsServer::Start(const ListenAddress& address,
                                                                  Render render) {
  const std::string where = address.host + ":" + std::to_string(address.port);
  sockaddr_in sa{};
  sa.sin_family = AF_INET;
  sa.sin_port = htons(static_cast<std::uint16_t>(address.port));
  if (inet_pton(AF_INET, address.host.c_str(), &sa.sin_addr) != 1) {
    return core::Status::InvalidArgument("'" + where + "': not an IPv4 address");
  }
  const int fd = socket(AF_INET, SOCK_STREAM | SOCK_CLOEXEC, 0);
  if (fd < 0) return core::Status::Unavailable("socket: " + ErrnoText(errno));
  const int on = 1;
  // Lets a restart listen again while old connections sit in TIME_WAIT; on Linux it does
  // not let two servers listen on one port.
  setsockopt(fd, SOL_SOCKET, SO_REUSEADDR, &on, sizeof on);
  // The socket API takes the generic address type.
  // NOLINTNEXTLINE(cppcoreguidelines-pro-type-reinterpret-cast)
  if (bind(fd, reinterpret_cast<const sockaddr*>(&sa), sizeof sa) != 0 || listen(fd, 8) != 0) {
    const int error = errno;
    close(fd);
    return core::Status::Unavailable("cannot listen on " + where + ": " + ErrnoText(error));
  }
  sockaddr_in bound{};
  socklen_t length = sizeof bound;
  // NOLINTNEXTLINE(cppcoreguidelines-pro-type-reinterpret-cast)
  getsockname(fd, reinterpret_cast<sockaddr*>(&bound), &length);
  int wake[2];
  if (pipe2(wake, O_CLOEXEC) != 0) {
    const int error = errno;
    close(fd);
    return core::Status::Unavailable("pipe: " + ErrnoText(error));
  }
  std::unique_ptr<MetricsServer> server(
      new MetricsServer(fd, wake[0], wake[1], ntohs(bound.sin_port), std::move(render)));
  server->thread_ = std::thread([s = server.get()] { s->Run(); });
  return server;
}

MetricsServer::MetricsServer(int listen_fd, int wake_read, int wake_write, int port, Render render)
    : listen_fd_(listen_fd),
      wake_read_(wake_read),
      wake_write_(wake_write),
      port_(port),
      render_(std::move(render)) {}

MetricsServer::~MetricsServer() {
  const char byte = 0;
  while (write(wake_write_, &byte, 1) < 0 && errno == EINTR) {
  }
  if (thread_.joinable()) thread_.join();
  close(listen_fd_);
  close(wake_read_);
  close(wake_write_);
}

void MetricsServer::Run() {
  for (;;) {
    pollfd fds[2] = {{listen_fd_, POLLIN, 0}, {wake_read_, POLLIN, 0}};
    if (poll(fds, 2, -1) < 0) {
      if (errno == EINTR) continue;
      return;
    }
    if ((fds[1].revents & POLLIN) != 0) return;
    if ((fds[0].revents & POLLIN) == 0) continue;
    const int client = accept4(listen_fd_, nullptr, nullptr, SOCK_CLOEXEC);
    if (client < 0) continue;
    Serve(client);
    close(client);
  }
}

void MetricsServer::Serve(int client_fd) {
  const SteadyClock::time_point deadline =
      SteadyClock::now() + std::chrono::milliseconds(kClientTimeoutMs);
  std::string request;
  bool too_big = false;
  if (!ReadRequest(client_fd, kMaxRequestBytes, deadline, &request, &too_big)) {
    if (too_big) {
      WriteAll(client_fd, Response("400 Bad Request", kPlainType, "request too large\n"), deadline);
    }
    return;
  }
  // Request line: METHOD SP TARGET SP HTTP/1.x
  const std::string_view line = std::string_view(request).substr(0, request.find("\r\n"));
  const std::size_t sp1 = line.find(' ');
  const std::size_t sp2 = sp1 == std::string_view::npos ? sp1 : line.find(' ', sp1 + 1);
  if (sp2 == std::string_view::npos || line.substr(sp2 + 1, 7) != "HTTP/1.") {
    WriteAll(client_fd, Response("400 Bad Request", kPlainType, "malformed request line\n"),
             deadline);
    return;
  }
  const std::string_view method = line.substr(0, sp1);
  std::string_view target = line.substr(sp1 + 1, sp2 - sp1 - 1);
  target = target.substr(0, target.find('?'));
  if (target != "/metrics") {
    WriteAll(client_fd, Response("404 Not Found", kPlainType, "only /metrics is served\n"),
             deadline);
  } else if (method != "GET") {
    WriteAll(client_fd, Response("405 Method Not Allowed", kPlainType, "only GET\n"), deadline);
  } else {
    WriteAll(client_fd, Response("200 OK", kMetricsType, render_()), deadline);
  }
}

}  // namespace nightjar::service
