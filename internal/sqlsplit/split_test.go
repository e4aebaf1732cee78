package sqlsplit

import (
	"reflect"
	"testing"
)

func TestSplit(t *testing.T) {
	tests := []struct {
		name   string
		script string
		want   []Statement
	}{
		{"empty", "", nil},
		{"blank and comments", "  \n-- nothing\n/* here */\n", nil},
		{"one without semicolon", "select 1", []Statement{{SQL: "select 1", Line: 1}}},
		{"two", "select 1;\nselect 2;\n", []Statement{{SQL: "select 1", Line: 1}, {SQL: "select 2", Line: 2}}},
		{"semicolon in string", "select 'a;b';select 2", []Statement{{SQL: "select 'a;b'", Line: 1}, {SQL: "select 2", Line: 1}}},
		{"doubled quote", "select 'it''s; fine'; select 3", []Statement{{SQL: "select 'it''s; fine'", Line: 1}, {SQL: "select 3", Line: 1}}},
		{"identifier", `select 1 as "a;b";`, []Statement{{SQL: `select 1 as "a;b"`, Line: 1}}},
		{"line comment", "select 1 -- not; here\n;", []Statement{{SQL: "select 1 -- not; here", Line: 1}}},
		{"block comment nested", "select /* a /* b; */ c; */ 1;", []Statement{{SQL: "select /* a /* b; */ c; */ 1", Line: 1}}},
		{"dollar string", "select $x$ a; b $x$; select $$;$$;", []Statement{{SQL: "select $x$ a; b $x$", Line: 1}, {SQL: "select $$;$$", Line: 1}}},
		{"parameter", "select $1;", []Statement{{SQL: "select $1", Line: 1}}},
		{"empty statements", ";;select 1;;", []Statement{{SQL: "select 1", Line: 1}}},
		{"line numbers", "\n\n-- c\n  select\n 1;\n\nselect 2;", []Statement{{SQL: "-- c\n  select\n 1", Line: 4}, {SQL: "select 2", Line: 7}}},
		{"notes", "--: Title\n--:  indented\nselect 1;\n--: end\n", []Statement{
			{Notes: []string{"Title", " indented"}, SQL: "select 1", Line: 3},
			{Notes: []string{"end"}},
		}},
		{"note inside statement is a comment", "select\n--: not a note\n1;", []Statement{{SQL: "select\n--: not a note\n1", Line: 1}}},
		{"note after a comment", "-- plain\n--: note\nselect 1;", []Statement{{Notes: []string{"note"}, SQL: "-- plain\n\nselect 1", Line: 3}}},
		{"unterminated string", "select 'abc; def", []Statement{{SQL: "select 'abc; def", Line: 1}}},
		{"escape string", `select E'it\'s; fine'; select e'\\'; select type'x;y'`, []Statement{
			{SQL: `select E'it\'s; fine'`, Line: 1}, {SQL: `select e'\\'`, Line: 1}, {SQL: `select type'x;y'`, Line: 1}}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got := Split(tt.script)
			if !reflect.DeepEqual(got, tt.want) {
				t.Errorf("Split(%q)\n got %#v\nwant %#v", tt.script, got, tt.want)
			}
		})
	}
}

func TestComplete(t *testing.T) {
	tests := []struct {
		script string
		want   bool
	}{
		{"", false},
		{"select 1", false},
		{"select 1;", true},
		{"select 1;  \n", true},
		{"select 1; -- done", true},
		{"select 'a;", false},
		{"select 'a;';", true},
		{"select 1 /* ; */", false},
		{"select 1 /* ;", false},
		{"select $$ ;", false},
		{"select $$ ; $$;", true},
		{`select "x;`, false},
		{`select E'\';`, false},
		{`select E'\\';`, true},
	}
	for _, tt := range tests {
		if got := Complete(tt.script); got != tt.want {
			t.Errorf("Complete(%q) = %v, want %v", tt.script, got, tt.want)
		}
	}
}
