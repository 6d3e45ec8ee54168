package rootio

import (
	"reflect"
	"unsafe"

	"go-hep.org/x/hep/groot/rbase"
	"go-hep.org/x/hep/groot/riofs"
)

// withName is a file option that makes a new ROOT file record name as its
// own name instead of the path it is created at. ROOT stores the name a
// file was created with in its first record (the TFile key and its
// TNamed) and in the record of every directory; WriteFile creates the
// file under a temporary name and renames it, and a reader listing the
// file must see the final name. go-hep v0.36.0 has no option for this:
// riofs.Create records its path argument in unexported fields (File.id
// and the name of the root directory), read before the options run only
// to build the File. The option sets those two fields; TestStoredName
// fails if it stops working.
func withName(name string) riofs.FileOption {
	return func(f *riofs.File) error {
		v := reflect.ValueOf(f).Elem()
		id := v.FieldByName("id")
		named := v.FieldByName("dir").FieldByName("dir").FieldByName("named")
		if !id.IsValid() || id.Kind() != reflect.String || !named.IsValid() || named.Type() != reflect.TypeOf(rbase.Named{}) {
			// Another layout of riofs.File: keep its own name rather
			// than write somewhere unknown.
			return nil
		}
		*(*string)(unsafe.Pointer(id.UnsafeAddr())) = name
		n := (*rbase.Named)(unsafe.Pointer(named.UnsafeAddr()))
		n.SetName(name)
		return nil
	}
}
