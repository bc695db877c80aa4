//go:build unix

package pipeline

import (
	"os"
	"syscall"
)

// readFile returns the bytes of the file at path and a function that
// releases them: mapped read-only into memory when mapped (the file must
// then not be cut short while they are in use), else read. A mapped file
// stays open until released, with a shared lock (lockShared) that keeps
// another run from writing it in place as its spare (see stateOut).
func readFile(path string, mapped bool) ([]byte, func(), error) {
	if !mapped {
		b, err := os.ReadFile(path)
		return b, func() {}, err
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, nil, err
	}
	lockShared(f)
	info, err := f.Stat()
	if err != nil {
		f.Close()
		return nil, nil, err
	}
	if info.Size() > 0 && int64(int(info.Size())) == info.Size() {
		data, err := syscall.Mmap(int(f.Fd()), 0, int(info.Size()), syscall.PROT_READ, syscall.MAP_SHARED)
		if err == nil {
			return data, func() {
				syscall.Munmap(data)
				f.Close()
			}, nil
		}
	}
	f.Close()
	b, err := os.ReadFile(path)
	return b, func() {}, err
}
