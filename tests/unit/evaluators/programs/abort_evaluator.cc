// A test evaluator that reads one request, says so on stderr, and aborts
// (SIGABRT), as a C or C++ simulator with a failed assertion would.
#include <cstdio>
#include <cstdlib>
#include <iostream>
#include <string>

int main() {
  std::string line;
  if (std::getline(std::cin, line)) {
    std::fputs("abort_evaluator: giving up on this request\n", stderr);
    std::fflush(stderr);
    std::abort();
  }
  return 0;
}
