// ModelThread: one thread that runs tasks (model updates) in the order they were submitted, so
// that rimwatchd's poll thread can store and acknowledge observations while the models catch up
// on the second core.
//
// The invariant: tasks run one at a time, in submission order, each exactly once; Drain()
// returns only when every task submitted before it has finished, and everything a finished task
// wrote is visible to the caller afterwards (the queue's mutex orders the memory). The destructor
// runs what is still queued, then joins.
//
// Thread safety: Submit, Drain, Backlog and WaitBelow may be called from any one thread (the
// owner); the tasks run on the model thread. Backlog() reads a copy of the count kept beside the
// lock, so the owner may poll it on every request without contending for the queue.
#pragma once

#include <atomic>
#include <chrono>
#include <condition_variable>
#include <cstddef>
#include <deque>
#include <functional>
#include <mutex>
#include <thread>
#include <vector>

namespace rimwatch::daemon {

class ModelThread {
 public:
  ModelThread();
  ~ModelThread();
  ModelThread(const ModelThread&) = delete;
  ModelThread& operator=(const ModelThread&) = delete;

  // Queues *tasks (in order) behind those already queued and leaves *tasks empty (its capacity
  // kept, for the caller's next batch).
  void Submit(std::vector<std::function<void()>>* tasks);
  // Blocks until every task submitted so far has finished.
  void Drain();
  // Tasks submitted and not yet finished.
  std::size_t Backlog() const;
  // Blocks until Backlog() < n or the timeout passes; true when below.
  bool WaitBelow(std::size_t n, std::chrono::milliseconds timeout);

 private:
  void Loop();

  mutable std::mutex mutex_;
  std::condition_variable work_;  // a task was queued, or stop
  std::condition_variable done_;  // a task finished
  std::deque<std::function<void()>> queue_;
  std::size_t unfinished_ = 0;  // queued + running
  std::size_t wake_below_ = 0;  // the owner waits until unfinished_ < this (0: nobody waits)
  std::atomic<std::size_t> backlog_{0};  // unfinished_, for Backlog() without the lock
  bool stop_ = false;
  std::thread thread_;  // last: started once the members above exist
};

}  // namespace rimwatch::daemon
