// Test support: one plain HTTP/1.1 GET to a server on 127.0.0.1 (the
// coordinator's or `skerry local`'s --http page), over a socket of the
// test's own, so that tests see the bytes a browser would get.
//
// Thread safety: each call uses its own socket.
#ifndef SKERRY_TESTS_SUPPORT_HTTP_GET_H_
#define SKERRY_TESTS_SUPPORT_HTTP_GET_H_

#include <string>
#include <utility>

namespace skerry::testing {

// GET `path` on 127.0.0.1:`port`, with `Authorization: Bearer token` unless
// the token is empty. Returns the status code and the body; {-1, "connect
// failed"} when nothing listens. Reads are bounded (30 s without a byte).
std::pair<int, std::string> HttpGet(int port, const std::string& path,
                                    const std::string& token = "");

}  // namespace skerry::testing

#endif  // SKERRY_TESTS_SUPPORT_HTTP_GET_H_
