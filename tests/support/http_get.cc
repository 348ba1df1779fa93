#include "tests/support/http_get.h"

#include <arpa/inet.h>
#include <netinet/in.h>
#include <sys/socket.h>
#include <unistd.h>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"

namespace skerry::testing {

std::pair<int, std::string> HttpGet(int port, const std::string& path,
                                    const std::string& token) {
  int fd = socket(AF_INET, SOCK_STREAM, 0);
  sockaddr_in addr{};
  addr.sin_family = AF_INET;
  addr.sin_port = htons(static_cast<uint16_t>(port));
  addr.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
  timeval tv{30, 0};
  setsockopt(fd, SOL_SOCKET, SO_RCVTIMEO, &tv, sizeof(tv));
  if (connect(fd, reinterpret_cast<sockaddr*>(&addr), sizeof(addr)) != 0) {
    close(fd);
    return {-1, "connect failed"};
  }
  std::string req = absl::StrCat("GET ", path,
                                 " HTTP/1.1\r\nHost: 127.0.0.1\r\n"
                                 "Connection: close\r\n");
  if (!token.empty()) {
    absl::StrAppend(&req, "Authorization: Bearer ", token, "\r\n");
  }
  req += "\r\n";
  (void)!write(fd, req.data(), req.size());
  std::string resp;
  char buf[65536];
  for (int i = 0; i < 100000; ++i) {
    const ssize_t n = read(fd, buf, sizeof(buf));
    if (n <= 0) break;
    resp.append(buf, static_cast<size_t>(n));
  }
  close(fd);
  int code = -1;
  if (resp.size() > 12) (void)absl::SimpleAtoi(resp.substr(9, 3), &code);
  const size_t body = resp.find("\r\n\r\n");
  return {code, body == std::string::npos ? "" : resp.substr(body + 4)};
}

}  // namespace skerry::testing
