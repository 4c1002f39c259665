// A small pool of helper threads for loops whose iterations are
// independent and whose results go to slots of their own, so the outcome
// does not depend on which thread ran what.
#pragma once

#include <atomic>
#include <condition_variable>
#include <cstddef>
#include <functional>
#include <mutex>
#include <system_error>
#include <thread>
#include <vector>

namespace benchid::ident {

// Runs job(0..n-1) on the calling thread and a few helper threads that wait
// between runs (a chunk at a time), each taking the next index in turn.
class WorkPool {
 public:
  explicit WorkPool(std::size_t helpers) {
    for (std::size_t i = 0; i < helpers; ++i) {
      try {
        threads_.emplace_back([this] { loop(); });
      } catch (const std::system_error&) {
        break;  // fewer helpers; the caller does the rest
      }
    }
  }
  ~WorkPool() {
    {
      std::lock_guard<std::mutex> lk(m_);
      quit_ = true;
    }
    wake_.notify_all();
    for (auto& t : threads_) t.join();
  }
  WorkPool(const WorkPool&) = delete;
  WorkPool& operator=(const WorkPool&) = delete;

  // job must not throw.
  void run(std::size_t n, const std::function<void(std::size_t)>& job) {
    {
      std::lock_guard<std::mutex> lk(m_);
      job_ = &job;
      n_ = n;
      next_.store(0);
      busy_ = threads_.size();
      ++generation_;
    }
    wake_.notify_all();
    work();
    std::unique_lock<std::mutex> lk(m_);
    done_.wait(lk, [&] { return busy_ == 0; });
    job_ = nullptr;
  }

 private:
  void work() {
    for (std::size_t k; (k = next_.fetch_add(1)) < n_;) (*job_)(k);
  }
  void loop() {
    std::size_t seen = 0;
    for (;;) {
      {
        std::unique_lock<std::mutex> lk(m_);
        wake_.wait(lk, [&] { return quit_ || generation_ != seen; });
        if (quit_) return;
        seen = generation_;
      }
      work();
      std::lock_guard<std::mutex> lk(m_);
      if (--busy_ == 0) done_.notify_all();
    }
  }
  std::vector<std::thread> threads_;
  std::mutex m_;
  std::condition_variable wake_, done_;
  const std::function<void(std::size_t)>* job_ = nullptr;
  std::size_t n_ = 0, busy_ = 0, generation_ = 0;
  std::atomic<std::size_t> next_{0};
  bool quit_ = false;
};

}  // namespace benchid::ident
