package ingest

import (
	"errors"
	"io/fs"
	"log/slog"
	"os"
	"path/filepath"
	"sync"
	"syscall"
	"unsafe"

	"golang.org/x/sys/unix"
)

func init() {
	newInotify = newInotifyNotifier
	inode = func(st fs.FileInfo) uint64 {
		if s, ok := st.Sys().(*syscall.Stat_t); ok {
			return s.Ino
		}
		return 0
	}
}

// inotifyMask asks for the events that tell a file is complete
// (IN_CLOSE_WRITE: closed after writing; IN_MOVED_TO: renamed into place),
// that it is being written (IN_CREATE, IN_MODIFY), and that it or a folder
// went away (IN_DELETE, IN_MOVED_FROM); see inotify(7).
const inotifyMask = unix.IN_CLOSE_WRITE | unix.IN_MOVED_TO | unix.IN_CREATE | unix.IN_MODIFY |
	unix.IN_DELETE | unix.IN_MOVED_FROM | unix.IN_ONLYDIR | unix.IN_EXCL_UNLINK

// inotifyNotifier reads Linux inotify events through x/sys/unix. The
// descriptor is non-blocking and wrapped in an *os.File, so reads wait in
// the runtime's poller and Close interrupts them.
type inotifyNotifier struct {
	fd   int
	f    *os.File
	log  *slog.Logger
	out  chan fsEvent
	done chan struct{}

	mu   sync.Mutex
	wds  map[int32]string
	dirs map[string]int32
}

func newInotifyNotifier(log *slog.Logger) (notifier, error) {
	fd, err := unix.InotifyInit1(unix.IN_CLOEXEC | unix.IN_NONBLOCK)
	if err != nil {
		return nil, os.NewSyscallError("inotify_init1", err)
	}
	n := &inotifyNotifier{fd: fd, f: os.NewFile(uintptr(fd), "inotify"), log: log,
		out: make(chan fsEvent, 1024), done: make(chan struct{}),
		wds: map[int32]string{}, dirs: map[string]int32{}}
	go n.loop()
	return n, nil
}

func (n *inotifyNotifier) add(dir string) error {
	wd, err := unix.InotifyAddWatch(n.fd, dir, inotifyMask)
	if err != nil {
		if errors.Is(err, unix.ENOSPC) {
			return errors.New("inotify_add_watch: watch limit reached (raise fs.inotify.max_user_watches)")
		}
		return os.NewSyscallError("inotify_add_watch", err)
	}
	n.mu.Lock()
	defer n.mu.Unlock()
	if old, ok := n.wds[int32(wd)]; ok && old != dir {
		delete(n.dirs, old)
	}
	n.wds[int32(wd)] = dir
	n.dirs[dir] = int32(wd)
	return nil
}

func (n *inotifyNotifier) removeTree(dir string) {
	n.mu.Lock()
	defer n.mu.Unlock()
	for d, wd := range n.dirs {
		if within(dir, d) {
			unix.InotifyRmWatch(n.fd, uint32(wd)) // fails harmlessly when the kernel dropped it
			delete(n.dirs, d)
			delete(n.wds, wd)
		}
	}
}

func (n *inotifyNotifier) events() <-chan fsEvent { return n.out }

func (n *inotifyNotifier) close() error {
	close(n.done)
	return n.f.Close()
}

func (n *inotifyNotifier) send(ev fsEvent) bool {
	select {
	case n.out <- ev:
		return true
	case <-n.done:
		return false
	}
}

func (n *inotifyNotifier) loop() {
	var buf [unix.SizeofInotifyEvent * 4096]byte
	for {
		k, err := n.f.Read(buf[:])
		if err != nil {
			select {
			case <-n.done:
			default:
				n.log.Error("watcher: reading inotify events failed; rescans only from now on", "err", err)
			}
			return
		}
		for off := 0; off+unix.SizeofInotifyEvent <= k; {
			raw := (*unix.InotifyEvent)(unsafe.Pointer(&buf[off]))
			nameBytes := buf[off+unix.SizeofInotifyEvent : off+unix.SizeofInotifyEvent+int(raw.Len)]
			off += unix.SizeofInotifyEvent + int(raw.Len)
			if !n.dispatch(raw.Wd, raw.Mask, cString(nameBytes)) {
				return
			}
		}
	}
}

func cString(b []byte) string {
	for i, c := range b {
		if c == 0 {
			return string(b[:i])
		}
	}
	return string(b)
}

// dispatch turns one inotify event into an fsEvent; false when closed.
func (n *inotifyNotifier) dispatch(wd int32, mask uint32, name string) bool {
	if mask&unix.IN_Q_OVERFLOW != 0 {
		return n.send(fsEvent{op: opOverflow})
	}
	n.mu.Lock()
	dir, ok := n.wds[wd]
	if mask&unix.IN_IGNORED != 0 && ok {
		delete(n.wds, wd)
		if n.dirs[dir] == wd {
			delete(n.dirs, dir)
		}
	}
	n.mu.Unlock()
	if !ok || name == "" {
		return true
	}
	path := filepath.Join(dir, name)
	var op fsOp
	isDir := mask&unix.IN_ISDIR != 0
	switch {
	case isDir && mask&unix.IN_MOVED_TO != 0:
		op = opDirMoved
	case isDir && mask&unix.IN_CREATE != 0:
		op = opDir
	case isDir && mask&(unix.IN_DELETE|unix.IN_MOVED_FROM) != 0:
		op = opDirGone
	case isDir:
		return true
	case mask&unix.IN_MOVED_TO != 0:
		op = opComplete
	case mask&unix.IN_CLOSE_WRITE != 0:
		op = opClosed
	case mask&(unix.IN_CREATE|unix.IN_MODIFY) != 0:
		op = opWritten
	case mask&(unix.IN_DELETE|unix.IN_MOVED_FROM) != 0:
		op = opGone
	default:
		return true
	}
	return n.send(fsEvent{path: path, op: op})
}
