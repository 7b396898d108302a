// child.cpp — fork, a pipe for the result, wait4 for the child's rusage.
#include "cli/bench/child.h"

#include <fcntl.h>
#include <sys/resource.h>
#include <sys/types.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cerrno>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <exception>

#include "audio/error.h"

namespace tessera::bench {
namespace {

void write_all(int fd, const std::string& s) {
  for (std::size_t done = 0; done < s.size();) {
    const ssize_t n = ::write(fd, s.data() + done, s.size() - done);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) return;
    done += std::size_t(n);
  }
}

std::string read_all(int fd) {
  std::string out;
  char buf[4096];
  for (;;) {
    const ssize_t n = ::read(fd, buf, sizeof buf);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) break;
    out.append(buf, std::size_t(n));
  }
  return out;
}

// Waits for pid; fills the exit code and peak memory (Linux reports ru_maxrss in KiB).
void reap(pid_t pid, ChildResult& r) {
  int status = 0;
  rusage ru{};
  while (::wait4(pid, &status, 0, &ru) < 0)
    if (errno != EINTR) throw Error(std::string("wait4: ") + std::strerror(errno));
  r.peak_mb = double(ru.ru_maxrss) / 1024.0;
  r.exit_code = WIFEXITED(status) ? WEXITSTATUS(status) : 128 + (WIFSIGNALED(status) ? WTERMSIG(status) : 0);
}

struct Pipe {
  int fd[2] = {-1, -1};
  Pipe() {
    if (::pipe2(fd, O_CLOEXEC) != 0) throw Error(std::string("pipe: ") + std::strerror(errno));
  }
  ~Pipe() {
    for (int f : fd)
      if (f >= 0) ::close(f);
  }
  void close_end(int i) {
    ::close(fd[i]);
    fd[i] = -1;
  }
};

}  // namespace

ChildResult run_in_child(const std::function<std::string()>& fn) {
  std::fflush(nullptr);  // the child must not write the parent's buffered output again
  Pipe p;
  const pid_t pid = ::fork();
  if (pid < 0) throw Error(std::string("fork: ") + std::strerror(errno));
  if (pid == 0) {
    ::close(p.fd[0]);
    int code = 0;
    std::string out;
    try {
      out = fn();
    } catch (const std::exception& e) {
      out = e.what(), code = 3;
    } catch (...) {
      out = "unknown error", code = 3;
    }
    write_all(p.fd[1], out);
    std::fflush(nullptr);
    ::_exit(code);
  }
  p.close_end(1);
  ChildResult r;
  r.output = read_all(p.fd[0]);
  reap(pid, r);
  if (r.exit_code != 0)
    throw Error(r.exit_code == 3 ? r.output : "benchmark child ended with status " + std::to_string(r.exit_code));
  return r;
}

ChildResult run_program(const std::vector<std::string>& argv, const std::vector<std::string>& env) {
  std::fflush(nullptr);
  // Built before fork: the child only calls async-signal-safe functions.
  std::vector<char*> args;
  for (const std::string& a : argv) args.push_back(const_cast<char*>(a.c_str()));
  args.push_back(nullptr);
  std::vector<std::string> env_strings;
  for (char** e = environ; *e; ++e) {
    const std::string kv = *e;
    bool replaced = false;  // a setting in `env` wins over the inherited one
    for (const std::string& add : env)
      replaced = replaced || kv.compare(0, add.find('=') + 1, add, 0, add.find('=') + 1) == 0;
    if (!replaced) env_strings.push_back(kv);
  }
  env_strings.insert(env_strings.end(), env.begin(), env.end());
  std::vector<char*> envp;
  for (const std::string& e : env_strings) envp.push_back(const_cast<char*>(e.c_str()));
  envp.push_back(nullptr);
  Pipe p;
  const pid_t pid = ::fork();
  if (pid < 0) throw Error(std::string("fork: ") + std::strerror(errno));
  if (pid == 0) {
    ::dup2(p.fd[1], 1);
    ::dup2(p.fd[1], 2);
    ::execvpe(args[0], args.data(), envp.data());
    ::_exit(127);
  }
  p.close_end(1);
  ChildResult r;
  r.output = read_all(p.fd[0]);
  reap(pid, r);
  return r;
}

}  // namespace tessera::bench
