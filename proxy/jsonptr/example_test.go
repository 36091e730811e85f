package jsonptr_test

import (
	"fmt"

	"riffle/proxy/jsonptr"
)

func Example() {
	doc := []byte(`{"shop":"garden","items":[{"sku":"rake-12"},{"sku":"hose-30"}]}`)
	p, err := jsonptr.Parse("/items/1/sku")
	if err != nil {
		fmt.Println(err)
		return
	}
	v, err := p.Get(doc)
	fmt.Println(string(v), err)
	// Output: "hose-30" <nil>
}

func ExamplePointer_FindArray() {
	doc := []byte(`{"items":[{"sku":"trowel","qty":2},{"sku":"seed-tray"}],"page":1}`)
	p, _ := jsonptr.Parse("/items")
	id, _ := jsonptr.Parse("/sku")
	list, elems, err := p.FindArray(nil, doc, id)
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, e := range elems {
		fmt.Println(string(doc[e.Start:e.End]), string(doc[e.ID.Start:e.ID.End]))
	}
	// The list's span lets a caller splice another array into the document.
	fmt.Println(string(doc[:list.Start]) + "[]" + string(doc[list.End:]))
	// Output:
	// {"sku":"trowel","qty":2} "trowel"
	// {"sku":"seed-tray"} "seed-tray"
	// {"items":[],"page":1}
}

func ExampleParse() {
	_, err := jsonptr.Parse("items")
	fmt.Println(err)
	p, _ := jsonptr.Parse("/a~1b/m~0n")
	fmt.Printf("%q\n", p.Tokens())
	// Output:
	// jsonptr: "items": not a JSON pointer (RFC 6901: must be empty or start with "/")
	// ["a/b" "m~n"]
}
